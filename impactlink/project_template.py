"""The commented project file that ``impactlink init`` writes (every setting at its default,
the values read from the data laid over them)."""

from __future__ import annotations

from typing import Any

from impactlink.project import (
    AuditLadder,
    Calibration,
    IndexSettings,
    LinkSettings,
    ModelSettings,
    ReportSettings,
    SkillSettings,
    TriggerSettings,
)
from impactlink.project_schema import toml_text

__all__ = ["render_project_file"]


def render_project_file(
    tables: dict[str, str],
    *,
    name: str = "my drought project",
    output_dir: str = "impactlink_output",
    impacts: dict[str, dict[str, Any]] | None = None,
    formats: dict[str, str] | None = None,
    units: dict[str, str] | None = None,
    settings: dict[str, dict[str, Any]] | None = None,
) -> str:
    """A commented project file with every setting at its documented default.

    Parameters
    ----------
    tables : dict
        Contract table name -> file name relative to the project file's folder.
    impacts : dict, optional
        Impact name -> options (must include ``source``). Default: one impact per impact
        table found, with default options.
    formats, units : dict, optional
        ``[formats]`` and ``[units]`` keys (:class:`FormatSettings`, :class:`UnitSettings`);
        the sections are written only when given.
    settings : dict, optional
        Values that replace the defaults of ``calibration``, ``indices`` and ``audit`` (for
        example the periods ``impactlink init`` read from the data).
    """
    from dataclasses import replace

    over = settings or {}
    c, i, a, lk, m, s, t = (
        replace(Calibration(), **over.get("calibration", {})),
        replace(IndexSettings(), **over.get("indices", {})),
        replace(AuditLadder(), **over.get("audit", {})),
        LinkSettings(), ModelSettings(), SkillSettings(), TriggerSettings(),
    )
    if impacts is None:
        impacts = {}
        if "yields" in tables:
            impacts["crop_shortfall"] = {"source": "yields"}
        if "prices" in tables:
            impacts["price_spike"] = {"source": "prices"}
        if "notices" in tables or "notice_snapshots" in tables:
            impacts["restrictions"] = {"source": "notices"}
        if "field_reports" in tables:
            impacts["field_reports"] = {"source": "field_reports"}
    if a.early is None or a.late is None:
        raise AssertionError("AuditLadder(): the default early and late periods must be set")
    lines = [
        "# impactlink project file. Paths are relative to this file's folder.",
        ("# Formats, units, periods, PET method and impacts were read from the data; the rest"
         if (settings or formats) else "# Every setting below"),
        "# is at its documented default; edit what you need.",
        "",
        "[project]",
        f"name = {_toml(name)}",
        'data_dir = "."',
        f"output_dir = {_toml(output_dir)}",
        "seed = 0            # seed for every random step (bootstrap, folds)",
        "jobs = 1            # worker processes for independent work",
        "max_rejected_share = 0.2   # a table losing a larger share of its rows stops (1 = never)",
        "",
        "[tables]            # contract table -> file",
    ]
    lines += [f"{k} = {_toml(v)}" for k, v in sorted(tables.items())]
    if formats:
        lines += ["", "[formats]           # how each file is written (table = the input contract)"]
        lines += [f"{k} = {_toml(v)}" for k, v in formats.items()]
    if units:
        lines += ["", "[units]             # units of the per-zone climate file, converted once"]
        lines += [f"{k} = {_toml(v)}" for k, v in units.items()]
    lines += [
        "",
        "[calibration]       # period for fitting index distributions (30-year normals)",
        f"start_year = {c.start_year}",
        f"end_year = {c.end_year}",
        f"min_years = {c.min_years}      # a shorter record is an error",
        "",
        "[indices]",
        f"scales_weeks = {_toml(list(i.scales_weeks))}",
        f"scales_months = {_toml(list(i.scales_months))}   # used when climate rows are monthly",
        f"indices = {_toml(list(i.indices))}",
        f"pet_method = {_toml(i.pet_method)}   # hargreaves | thornthwaite | supplied",
        f"min_valid_days = {i.min_valid_days}       # fewer valid days makes the week missing",
        "indicators = []          # supplied indicators to standardize; empty = all found",
        "",
        "[[audit]]           # a ladder of thresholds to audit, with your stage names",
        f"name = {_toml(a.name)}",
        f"index = {_toml(a.index)}",
        f"scale_weeks = {a.scale_weeks}",
        f"kind = {_toml(a.kind)}        # value | percentile",
        f"thresholds = {_toml(list(a.thresholds))}",
        f"stages = {_toml(list(a.stages))}",
        f"early = {_toml(list(a.early))}",
        f"late = {_toml(list(a.late))}",
        f"n_boot = {a.n_boot}",
        "",
    ]
    for iname, opts in impacts.items():
        lines.append(f"[impacts.{iname}]")
        for k, v in opts.items():
            if not isinstance(v, dict):
                lines.append(f"{k} = {_toml(v)}")
        for k, v in opts.items():
            if isinstance(v, dict):
                lines.append(f"[impacts.{iname}.{k}]")
                for kk, vv in v.items():
                    lines.append(f"{_toml(kk)} = {_toml(vv)}")
        lines.append("")
    lines += [
        "[link]",
        f"lags_weeks = {_toml(list(lk.lags_weeks))}",
        f"equal_area_crs = {_toml(lk.equal_area_crs)}",
        "",
        "[models]",
        f"link = {_toml(m.link)}            # logit | probit (ordinal models)",
        f"pooling = {_toml(m.pooling)}           # all | region | county (partial pooling)",
        f"seasonal = {_toml(m.seasonal)}",
        "traits = []",
        f"curve_ci = {m.curve_ci}",
        "",
        "[skill]",
        f"cv = {_toml(s.cv)}   # leave_one_year_out | blocked_k_fold | leave_one_region_out",
        f"k_folds = {s.k_folds}",
        f"n_boot = {s.n_boot}",
        f"ci = {s.ci}",
        f"n_bins = {s.n_bins}",
        f"pairs = {_toml(s.pairs)}",
        f"challenger = {_toml(s.challenger)}",
        "",
        "[triggers]",
        f"entry_weeks = {t.entry_weeks}",
        f"exit_weeks = {t.exit_weeks}",
        "# plan = \"trigger_plan.toml\"   # your committee's trigger plan, replayed and scored",
        "",
        "[contrast]",
        "counties = []      # two county ids or names to explain; [] = the most striking look-alike pair",
        "# period = \"2011-2013\"   # years to compare; default the pair's drought year",
        "n_boot = 200",
        "",
        "[report]",
        "county_cards = []   # counties (ids or names) with a one-page card; [] = every county",
        f"max_cards = {ReportSettings().max_cards}     # ... when there are at most this many",
        "",
    ]
    return "\n".join(lines)


def _toml(v: Any) -> str:
    return toml_text(v)  # the one TOML writer (impactlink.project_schema)
