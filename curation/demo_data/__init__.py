"""The invented demo scenario: `build(session)` writes it through the services."""

from curation.demo_data.scenario import DemoSummary, PlantedProblem, build
from curation.demo_data.setting import DEMO_ACTOR

__all__ = ["DEMO_ACTOR", "DemoSummary", "PlantedProblem", "build"]
