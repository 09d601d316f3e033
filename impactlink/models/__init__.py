"""Models stage: logistic and proportional-odds impact models, partial pooling, impact curves.

statsmodels is imported only inside the fitting functions, so importing this package is cheap.
"""

from impactlink.models.curves import crossings, impact_curves, plot_impact_curves
from impactlink.models.fit import ImpactModel, fit_impact_model

__all__ = [
    "ImpactModel",
    "fit_impact_model",
    "impact_curves",
    "crossings",
    "plot_impact_curves",
]
