"""Unit mistakes of a per-zone file, found on its values as read, before its range rules."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd

from impactlink.inputs._errors import InputError
from impactlink.inputs.formats._ledger import RowLedger
from impactlink.inputs.plausibility import fatal_line, unit_findings
from impactlink.schema import COUNTY, DATE

__all__ = ["stop_on_unit_mistakes"]


def stop_on_unit_mistakes(path: Path, led: RowLedger, zone: np.ndarray, dates,
                          values: dict[str, np.ndarray], names: dict[str, str]) -> None:
    """Unit mistakes of the zone series (a Fahrenheit column under a Celsius name, inches
    under a millimetre name) stop the read before the range rules, named by zone and by the
    file's own column, so a unit mistake is never half-rejected as out-of-range rows (see
    :func:`impactlink.inputs.plausibility.unit_findings`)."""
    alive = led.alive
    frame = pd.DataFrame({COUNTY: np.asarray(zone, dtype=object)[alive],
                          DATE: np.asarray(dates)[alive],
                          **{c: np.asarray(v, dtype=float)[alive] for c, v in values.items()}})
    found = unit_findings(frame.dropna(subset=[DATE]), "climate", file=str(path))
    if found:
        named = [replace(f, place="zone", column=names.get(f.column, f.column)) for f in found]
        raise InputError(fatal_line(named))
