"""Skill heat map data and figure."""

import matplotlib

matplotlib.use("Agg")

import pandas as pd  # noqa: E402
import pytest  # noqa: E402

from impactlink.skill.figures import plot_skill_heatmap, skill_grid  # noqa: E402


def _table():
    # hand-built rows: spi at 4 weeks is best at lag 2 (0.30 beats 0.10 at lag 0)
    rows = [("spi", 4, 0, 0.10), ("spi", 4, 2, 0.30), ("spi", 13, 0, 0.05),
            ("spei", 4, 0, -0.02), ("spei", 13, 1, 0.12)]
    t = pd.DataFrame(rows, columns=["index", "scale_weeks", "lag_weeks", "rpss"])
    t["target"] = "x"
    t["model"] = "index"
    return t


def test_grid_takes_the_best_lag_per_cell():
    g = skill_grid(_table(), "x")
    assert g.loc["spi", 4] == 0.30
    assert g.attrs["lag_weeks"].loc["spi", 4] == 2
    assert g.loc["spei", 4] == -0.02


def test_heatmap_draws_and_errors():
    fig = plot_skill_heatmap(_table(), "x")
    assert len(fig.axes) == 2  # the map and its colour bar
    with pytest.raises(ValueError, match="no rows for target='y'"):
        skill_grid(_table(), "y")
