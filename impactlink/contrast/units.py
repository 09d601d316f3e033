"""County traits in the units people use: percent, millimetres, head per km².

Traits are stored as the traits table gives them (shares as fractions 0-1). Tables meant for
readers show them in real units through :func:`trait_display`, never in standard deviations.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["TraitDisplay", "trait_display", "display_values"]

#: Plain names of the traits of the project's traits contract; other traits use their name.
_LABELS = {
    "irrigated_share": "irrigated share of cropland",
    "soil_whc_mm": "soil water holding capacity",
    "groundwater_reliance": "share of public water supply from groundwater",
    "cattle_per_km2": "cattle density",
}


@dataclass(frozen=True)
class TraitDisplay:
    """How one trait is shown.

    Attributes
    ----------
    column : str
        Column stem in reader tables (``irrigated_share`` -> ``irrigated_pct``).
    label : str
        Plain name ("irrigated share of cropland").
    unit : str
        Unit after the number ("%", "mm", "head/km²", or "").
    factor : float
        Multiplier from the traits table's unit to the shown unit (100 for a 0-1 share).
    """

    column: str
    label: str
    unit: str
    factor: float

    def format(self, value: float) -> str:
        """``41 %``, ``118 mm``, ``12.5 head/km²``."""
        v = float(value) * self.factor
        digits = 1 if self.unit == "head/km²" or (self.unit == "" and abs(v) < 10) else 0
        text = f"{v:.{digits}f}"
        return f"{text} {self.unit}".strip() if self.unit else text


def trait_display(name: str) -> TraitDisplay:
    """Display rule of a trait from its column name (suffix ``_share``, ``_reliance``,
    ``_mm``, ``_per_km2``)."""
    label = _LABELS.get(name, name.replace("_", " "))
    if name.endswith("_share") or name.endswith("_reliance"):
        stem = name.rsplit("_", 1)[0]
        return TraitDisplay(f"{stem}_pct", label, "%", 100.0)
    if name.endswith("_mm"):
        return TraitDisplay(name, label, "mm", 1.0)
    if name.endswith("_per_km2"):
        unit = "head/km²" if name.startswith("cattle") else "per km²"
        return TraitDisplay(name, label, unit, 1.0)
    return TraitDisplay(name, label, "", 1.0)


def display_values(name: str, values) -> np.ndarray:
    """Trait values converted to the shown unit."""
    return np.asarray(values, dtype=float) * trait_display(name).factor
