"""The invented garden-centre demo (``accuracy-checks demo``): data, then the story.

- :mod:`.world`: the fictional chain's weekly demand and a simple forecaster (arrays only);
- :mod:`.scenario`: the files of a scenario (actuals, earlier and weekly forecasts, a config)
  with a few planted problems, :func:`generate_scenario`;
- :mod:`.narrator`: the gate run on each cycle in order, narrated, :func:`run_demo`.

Nothing here is real: no company, brand, place or person.
"""

from accuracy_checks.demo.narrator import run_demo
from accuracy_checks.demo.scenario import (
    PlantedProblems,
    Scenario,
    describe_planted,
    generate_scenario,
)

__all__ = [
    "PlantedProblems",
    "Scenario",
    "describe_planted",
    "generate_scenario",
    "run_demo",
]
