"""Helpers the one-defect corpus files share: the fatal line of `check` and `run`, CSV rows
written as text, and the committed scenario's climate cut to a few years."""

from __future__ import annotations

import csv
from pathlib import Path

import pandas as pd

from impactlink.cli import main

SCENARIO = Path(__file__).resolve().parents[2] / "scenario_data"


def fatal_line(path: Path, monkeypatch, capsys) -> str:
    """The error line of ``impactlink check`` and of ``impactlink run`` (they must be equal,
    exit 2, no traceback); the run's indices stage fails the test if it is reached."""
    import impactlink.pipeline.stages as stages

    def no_indices(*args, **kwargs):
        raise AssertionError("the indices stage was reached")

    monkeypatch.setattr(stages, "indices", no_indices)
    lines = []
    for command in ("check", "run"):
        assert main([command, str(path)]) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert "Traceback" not in "\n".join(err)
        assert len(err) >= 1 and err[-1].startswith("impactlink: error: ")
        lines.append(err[-1].removeprefix("impactlink: error: "))
    assert lines[0] == lines[1]
    return lines[0]


def write_rows(path: Path, rows: list[dict[str, str]], *, bom: bool = False) -> None:
    """Rows as a CSV of text cells (with a UTF-8 byte-order mark when ``bom``)."""
    with open(path, "w", newline="", encoding="utf-8-sig" if bom else "utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)


def scenario_climate(years: tuple[str, str]) -> pd.DataFrame:
    """The scenario's daily climate from ``years[0]`` to ``years[1]`` (ISO dates)."""
    c = pd.read_parquet(SCENARIO / "climate.parquet")
    return c[(c["date"].astype(str) >= years[0]) & (c["date"].astype(str) <= years[1])]
