"""Rules over the history resolver. Each rule is one small function with a finding code;
a finding names its severity, the item and the events that are its evidence, so the same
finding can be shown on a page, printed by the CLI and asserted in a test."""
