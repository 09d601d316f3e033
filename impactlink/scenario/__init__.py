"""The fictional scenario world of impactlink: a made-up state, its weather and its impacts.

:func:`generate` writes every file of the input contract (see ``scenario_data/README.md``
for the data dictionary, the generation rules and the planted drivers). The data are
invented for demonstration and testing only.
"""

from ._build import DEFAULT_SEED, SCENARIO_FILES, generate

__all__ = ["generate", "DEFAULT_SEED", "SCENARIO_FILES"]
