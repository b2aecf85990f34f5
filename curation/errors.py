"""The small error hierarchy every layer raises and the web and CLI layers translate."""

from __future__ import annotations


class CurationError(Exception):
    """Base class for every error the application means to show to a user."""


class InvalidInput(CurationError):
    """A value that breaks a field's rule; names the field, the value and what is allowed."""

    def __init__(self, field: str, value: object, allowed: str) -> None:
        self.field = field
        self.value = value
        self.allowed = allowed
        super().__init__(f"{field}: {value!r} is not allowed ({allowed})")


class ImportRejected(InvalidInput):
    """A file import refused whole; `problems` names every bad row with its line."""

    def __init__(self, problems: list[str]) -> None:
        self.problems = problems
        super().__init__("file", f"{len(problems)} bad row(s)", "; ".join(problems[:20]))


class NaiveTimestamp(InvalidInput):
    """A timestamp without a timezone: we cannot tell which instant it means."""

    def __init__(self, field: str, value: object) -> None:
        super().__init__(field, value, "a timezone-aware timestamp, e.g. 2026-03-01T10:15:00+01:00")


class NotFound(CurationError):
    """A code or id that names nothing in the database."""


class RuleViolation(CurationError):
    """A write that would break a rule across rows (graph, custody, time)."""


class DuplicateCode(RuleViolation):
    """An item code that is already in use (codes are never reused)."""


class DerivationCycle(RuleViolation):
    """A derivation that would make an item its own ancestor."""


class ContainmentCycle(RuleViolation):
    """A placement that would make a container contain itself."""


class OverlappingPlacement(RuleViolation):
    """A placement that overlaps another placement of the same item in time."""


class LedgerError(CurationError):
    """A write that would bypass or break the ledger."""


class NotADemoDatabase(CurationError):
    """`curation demo` was pointed at a database that holds real records."""
