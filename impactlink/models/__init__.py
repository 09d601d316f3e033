"""Models stage: logistic and proportional-odds impact models, partial pooling, impact curves.

Modules: ``result`` (the :class:`ImpactModel` object), ``fit`` (:func:`fit_impact_model`),
``batch`` (the one Newton-Raphson solver every fit goes through), ``separation`` (detection
and the ridge refit), ``predict`` (linear predictors and their variances), ``pooling``
(county partial pooling), ``curves`` (impact curves and crossings). The package needs numpy,
pandas and scipy only; matplotlib is imported inside :func:`plot_impact_curves`.
"""

from impactlink.models.curves import crossings, impact_curves, plot_impact_curves
from impactlink.models.fit import fit_impact_model
from impactlink.models.result import ImpactModel

__all__ = [
    "ImpactModel",
    "fit_impact_model",
    "impact_curves",
    "crossings",
    "plot_impact_curves",
]
