"""The fictional scenario world of impactlink: a made-up state, its weather and its impacts.

:func:`generate` writes every file of the input contract (see ``scenario_data/README.md``
for the data dictionary, the generation rules and the planted drivers) for a world of 10 to
3 143 counties (60 by default, the committed scenario). The data are invented for
demonstration and testing only.
"""

from ._build import DEFAULT_SEED, SCENARIO_FILES, generate
from ._geography import DEFAULT_COUNTIES, MAX_COUNTIES, MIN_COUNTIES

__all__ = ["generate", "DEFAULT_SEED", "SCENARIO_FILES", "DEFAULT_COUNTIES", "MIN_COUNTIES",
           "MAX_COUNTIES"]
