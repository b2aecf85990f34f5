"""Flask blueprints, one module per area."""
