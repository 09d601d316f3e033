"""Property: every input row is used or rejected, and the counts reconcile.

The expected outcome of each random table is computed by a plain row-by-row Python model of
the documented rules (the reader itself is vectorised), so the test checks the reader against
an independent statement of the rules, not against itself.
"""

from __future__ import annotations

import tempfile
from pathlib import Path

import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from inputs_fixtures import COUNTY_IDS, counties_frame, make_project, write_csv

from impactlink.inputs import InputError, read_inputs

GOOD_DATES = [f"2001-{m:02d}-01" for m in range(1, 13)] + [f"2002-{m:02d}-01" for m in range(1, 13)]
COUNTY_CHOICES = [*COUNTY_IDS, "99999", ""]
DATE_CHOICES = [*GOOD_DATES[:6], "2001-02-30", "", "soon"]
PRECIP_CHOICES = ["0", "41.5", "-2", "-999", "x", "", "nan"]

row = st.tuples(
    st.sampled_from(COUNTY_CHOICES), st.sampled_from(DATE_CHOICES), st.sampled_from(PRECIP_CHOICES)
)


def _expected(rows: list[tuple[str, str, str]], n_good: int) -> set[int]:
    """Row numbers (1-based, after ``n_good`` fixed good rows) the rules must reject."""
    seen: set[tuple[str, str]] = set()
    bad_rows: set[int] = set()
    all_rows = [(COUNTY_IDS[0], d, "1") for d in GOOD_DATES[6 : 6 + n_good]] + rows
    for i, (county, date, precip) in enumerate(all_rows, start=1):
        cell_bad = (
            county == ""
            or date in ("", "soon", "2001-02-30")
            or precip in ("", "nan", "-2", "-999", "x")  # blank / NA spelling = missing
        )
        if cell_bad:
            bad_rows.add(i)
            continue
        if county not in COUNTY_IDS:
            bad_rows.add(i)
            continue
        if (county, date) in seen:
            bad_rows.add(i)
            continue
        seen.add((county, date))
    return bad_rows


def _mixed_cadence(rows: list[tuple[str, str, str]]) -> bool:
    """Whether a known county's usable rows come at another cadence than the others' (the
    rule of ``mixed_cadence``: the most common step between distinct dates, the shortest of
    ties; 28-31 days is monthly; counties with fewer than 3 dates are not judged)."""
    import collections
    import datetime as dt

    dates: dict[str, set[dt.date]] = collections.defaultdict(set)
    for county, date, precip in rows:
        if county in COUNTY_IDS and date in GOOD_DATES and precip in ("0", "41.5", "40"):
            dates[county].add(dt.date.fromisoformat(date))
    kinds = []
    for days in dates.values():
        if len(days) < 3:
            continue
        d = sorted(days)
        steps = collections.Counter((b - a).days for a, b in zip(d, d[1:], strict=False))
        top = max(steps.values())
        step = min(k for k, v in steps.items() if v == top)
        kinds.append("monthly" if 28 <= step <= 31 else "other")
    return len(set(kinds)) > 1


@pytest.mark.filterwarnings("ignore::impactlink.inputs.InputWarning")
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(row, min_size=0, max_size=40))
def test_rows_read_equal_used_plus_rejected(rows):
    n_good = 12  # a fixed good year so the table is never wholly unknown or too short
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        counties_frame().to_file(folder / "counties.gpkg")
        good = [(COUNTY_IDS[0], d, "40")  # plausible monthly millimetres
                for d in GOOD_DATES[6 : 6 + n_good]]
        frame = pd.DataFrame(good + rows, columns=["county_id", "date", "precip_mm"])
        path = write_csv(folder, "climate", frame)
        if _mixed_cadence(good + rows):  # the documented whole-table stop, not a row rule
            with pytest.raises(InputError, match="rows among monthly rows"):
                read_inputs(make_project(folder, min_years=1))
            return
        b = read_inputs(make_project(folder, min_years=1))
    for rec in b.counts.itertuples():
        assert rec.rows_read == rec.rows_used + rec.rows_rejected
        assert len(b.tables[rec.table]) == rec.rows_used
        rej = b.rejected[b.rejected.table == rec.table]
        assert rej["row"].nunique() == rec.rows_rejected
        assert rej["row"].between(1, rec.rows_read).all()
    rej = b.rejected[b.rejected.table == "climate"]
    assert set(rej["row"]) == _expected(rows, n_good)
    assert (rej["file"] == str(path)).all()
    assert b.counts.set_index("table").loc["climate", "rows_read"] == len(frame)
