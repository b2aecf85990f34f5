"""The invented demo scenario (placeholder until the builder lands)."""
