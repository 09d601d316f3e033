"""The key schema of the project file: every key with its type, range and order.

:func:`check_value` checks one value against its :class:`Key` and returns at most one
:class:`Problem`; :mod:`impactlink.project_check` walks a whole project file with it. Each
problem names the table and the key, says what was found and what to write instead, e.g.::

    indices.scales_weeks: got "13" (text), expected a list of whole numbers from 1 to 520;
    write scales_weeks = [13]

The schema is a plain table (:data:`SECTIONS`, :data:`IMPACT_OPTIONS`) of :class:`Key`
records, one per key; defaults live with the settings dataclasses in
:mod:`impactlink.project`.

Examples
--------
>>> [p.line("impactlink.toml") for p in check_value("project", "seed", "twenty", SECTIONS["project"]["seed"])]
['impactlink.toml: project.seed: got "twenty" (text), expected a whole number >= 0; write e.g. seed = 0']
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Literal

__all__ = [
    "Problem",
    "Key",
    "SECTIONS",
    "IMPACT_OPTIONS",
    "IMPACT_TABLES",
    "INPUT_STAGE_OPTIONS",
    "KNOWN_INDICES",
    "TOP_LEVEL",
    "check_value",
    "describe",
    "toml_text",
]

Kind = Literal["int", "number", "bool", "text", "ints", "numbers", "texts", "text_or_texts",
               "years", "pair", "ladder", "stage_names"]

#: Index names the index engine computes (impactlink.indices.compute.KNOWN_INDICES).
KNOWN_INDICES = ("spi", "spei", "eddi")
YEAR_RANGE = (1800, 2200)


@dataclass(frozen=True)
class Problem:
    """One problem of a project file.

    Attributes
    ----------
    table : str
        ``"project"``, ``"indices"``, ``"impacts.maize"``, ``"audit[2]"`` (1-based), or ``""``
        for the top level.
    key : str
    found : str
        What was found (``got "13" (text), expected ...``).
    fix : str
        What to write instead.
    """

    table: str
    key: str
    found: str
    fix: str

    def line(self, where: str) -> str:
        """One line ``<file>: [<table>.]<key>: <what was found>; <what to do>``."""
        name = f"{self.table}.{self.key}" if self.table else self.key
        return f"{where}: {name}: {self.found}; {self.fix}"


@dataclass(frozen=True)
class Key:
    """What one key holds.

    ``kind``: int, number, bool, text, ints, numbers, texts, text_or_texts (one text or a
    list), years ([first, last] whole years, or [] for none), pair ([low, high] whole numbers),
    ladder (level names or numbers), stage_names (issuer -> {stage name -> level}).
    ``lo``/``hi``: inclusive bounds of a number or of each list item (``open_lo``/``open_hi``
    make them exclusive); ``choices``: allowed texts; ``order``: list order;
    ``empty``: whether a list may be empty; ``example``: TOML text suggested as a fix.
    """

    kind: Kind
    lo: float | None = None
    hi: float | None = None
    open_lo: bool = False
    open_hi: bool = False
    choices: tuple[str, ...] = ()
    order: Literal["", "increasing", "decreasing", "unique"] = ""
    empty: bool = False
    example: str = ""


def _int(lo=None, hi=None, ex="") -> Key:  # noqa: ANN001
    return Key("int", lo, hi, example=ex)


def _choice(*choices: str) -> Key:
    return Key("text", choices=choices, example=f'"{choices[0]}"')


_TEXT = Key("text", example='"spi"')  # defined_by: the index an impact is keyed to
_BOOL = Key("bool", example="true")
_PROB = Key("number", 0, 1, open_lo=True, open_hi=True, example="0.9")

#: Keys of each table; ``tables`` and ``impacts`` are checked separately.
SECTIONS: dict[str, dict[str, Key]] = {
    "project": {
        "name": Key("text", example='"my drought project"'), "data_dir": Key("text", example='"."'),
        "output_dir": Key("text", example='"impactlink_output"'),
        "seed": _int(0, None, "0"), "jobs": _int(1, 1024, "1"),
        # share of a table's rows the inputs stage may reject before the run stops (1 = never)
        "max_rejected_share": Key("number", 0, 1, example="0.2"),
    },
    "calibration": {
        "start_year": _int(*YEAR_RANGE, "1991"), "end_year": _int(*YEAR_RANGE, "2020"),
        "min_years": _int(1, 400, "20"),
    },
    "indices": {
        "scales_weeks": Key("ints", 1, 520, order="unique", example="[4, 8, 13, 26, 52]"),
        "scales_months": Key("ints", 1, 120, order="unique", example="[1, 3, 6, 12]"),
        "indices": Key("texts", choices=KNOWN_INDICES, order="unique", empty=True,
                       example='["spi", "spei", "eddi"]'),
        "pet_method": _choice("hargreaves", "thornthwaite", "supplied"),
        "min_valid_days": _int(1, 7, "6"),
        "indicators": Key("texts", order="unique", empty=True, example="[]"),
    },
    "audit": {
        "name": Key("text", example='"spi_ladder"'), "index": Key("text", example='"spi"'),
        "scale_weeks": _int(1, 520, "13"), "kind": _choice("value", "percentile"),
        "thresholds": Key("numbers", order="decreasing", example="[-1.0, -1.5, -2.0]"),
        "stages": Key("texts", order="unique", example='["watch", "warning", "emergency"]'),
        "early": Key("years", *YEAR_RANGE, example="[1981, 2002]"),
        "late": Key("years", *YEAR_RANGE, example="[2003, 2025]"),
        "n_boot": _int(0, 100_000, "500"),
    },
    "link": {
        "lags_weeks": Key("ints", 0, 520, order="unique", example="[0, 2, 4, 8, 13, 26]"),
        "equal_area_crs": Key("text", example='"EPSG:5070"'),
    },
    "models": {
        "link": _choice("logit", "probit"), "pooling": _choice("all", "region", "county"),
        "seasonal": _BOOL, "traits": Key("texts", order="unique", empty=True, example="[]"),
        "curve_ci": _PROB,
    },
    "skill": {
        "cv": _choice("leave_one_year_out", "blocked_k_fold", "leave_one_region_out"),
        "k_folds": _int(2, 1000, "5"), "n_boot": _int(0, 100_000, "200"), "ci": _PROB,
        "n_bins": _int(2, 100_000, "200"), "pairs": _BOOL, "challenger": _BOOL,
    },
    "triggers": {"entry_weeks": _int(1, 520, "2"), "exit_weeks": _int(1, 520, "4"),
                 "plan": Key("text", example='"trigger_plan.toml"')},
    "formats": {"climate": _choice("table", "zones"), "indicators": _choice("table", "zones"),
                "yields": _choice("table", "quickstats"), "counties": _choice("table", "topojson"),
                "zones": Key("text", example='"county_to_zone.csv"'),
                "zone_column": Key("text", example='"climdiv_id"')},
    "units": {"precip_unit": _choice("mm", "in"), "temp_unit": _choice("C", "F")},
    "contrast": {"counties": Key("texts", order="unique", empty=True, example='["90001", "90003"]'),
                 "period": Key("text", example='"2011-2013"'), "n_boot": _int(0, 100_000, "200")},
    "report": {"county_cards": Key("texts", order="unique", empty=True,
                                   example='["90001", "Tovova"]'),
               "max_cards": _int(0, 100_000, "300")},
}

_SEASON = {"season_week": _int(1, 53, "31"), "window_weeks": _int(1, 52, "1"),
           "window_stat": _choice("value", "min", "mean")}
_HORIZON = Key("ints", 1, 520, order="unique", example="[4, 13]")

#: Options of each impact source (the linking stage's YIELD_OPTIONS, PRICE_OPTIONS,
#: NOTICE_OPTIONS and REPORT_OPTIONS; a test keeps the names equal).
IMPACT_OPTIONS: dict[str, dict[str, Key]] = {
    "yields": {
        "crop": Key("text_or_texts", example='"maize"'),
        "practice": Key("text_or_texts", example='"rainfed"'),
        "trend": _choice("auto", "linear", "quadratic", "lowess"), "robust": _BOOL,
        "lowess_frac": Key("number", 0, 1, open_lo=True, example="0.6"),
        "min_years": _int(2, 400, "10"),
        "class_pct": Key("numbers", 0, 100, open_lo=True, order="increasing",
                         example="[10, 20, 30]"),
        "binary_pct": Key("number", 0, 100, open_lo=True, example="20"),
        **_SEASON, "defined_by": _TEXT,
        "season_weeks": Key("ints", 1, 53, order="increasing", example="[22, 40]"),
        "season_step_weeks": _int(1, 26, "2"),
    },
    "prices": {
        "commodity": Key("text_or_texts", example='"hay"'),
        "base_years": Key("years", *YEAR_RANGE, example="[2010, 2014]"),
        "baseline_years": _int(1, 100, "5"), "min_baseline_years": _int(1, 100, "3"),
        "class_pct": Key("numbers", 0, None, open_lo=True, order="increasing",
                         example="[10, 25, 50]"),
        "binary_pct": Key("number", 0, None, open_lo=True, example="25"),
        "weight_trait": Key("text", example='"acres"'), "window_weeks": _SEASON["window_weeks"],
        "window_stat": _SEASON["window_stat"], "defined_by": _TEXT,
    },
    "notices": {
        "ladder": Key("ladder", example='["caution", "cutback", "ration"]'),
        "stage_names": Key("stage_names", example='{ "Pine Utility" = { voluntary = 1 } }'),
        "open_end_cap_weeks": _int(1, 5200, "26"),
        "drought_causes": Key("texts", order="unique", example='["drought"]'),
        "episodic": _BOOL, "horizon_weeks": _HORIZON, "onset_level": _int(1, 100, "1"),
        "supersede_open": _BOOL, "snapshot_hold_weeks": _int(1, 520, "8"),
        "defined_by": _TEXT,
    },
    "field_reports": {
        "sector": Key("text_or_texts", example='"crops"'),
        "min_severity": _int(0, 1000, "1"),
        "effort_alpha": Key("number", 0, 1, open_lo=True, open_hi=True, example="0.05"),
        "defined_by": _TEXT, "episodic": _BOOL, "horizon_weeks": _HORIZON,
        "onset_level": _int(1, 1000, "1"), "severity_range": Key("pair", 0, 1000, example="[1, 5]"),
    },
}

#: Tables each source needs: every table of one inner tuple, for at least one inner tuple.
IMPACT_TABLES: dict[str, tuple[tuple[str, ...], ...]] = {
    "yields": (("yields",),),
    "prices": (("prices", "price_index"),),
    "notices": (("notices",), ("notice_snapshots",)),
    "field_reports": (("field_reports",),),
}

#: Options whose values the inputs stage reads and checks again (for projects built in code).
INPUT_STAGE_OPTIONS = frozenset({"ladder", "stage_names", "severity_range"})

TOP_LEVEL = ("project", "tables", "calibration", "indices", "audit", "impacts", "link", "models",
        "skill", "triggers", "contrast", "report", "formats", "units")


# --------------------------------------------------------------------------- one value
def check_value(table: str, key: str, v: Any, k: Key) -> list[Problem]:
    """Problems of one value (at most one: the first that applies)."""
    msg = _kind_problem(v, k)
    if msg is None:
        return []
    found, want = msg
    return [Problem(table, key, f"got {found}, expected {want}", _suggest(key, v, k))]


def _kind_problem(v: Any, k: Key) -> tuple[str, str] | None:
    want = _want(k)
    if k.kind in ("int", "number", "bool", "text"):
        if not _scalar_ok(v, k):
            return describe(v), want
        return None
    if k.kind == "text_or_texts":
        if isinstance(v, str) and v.strip():
            return None
        if isinstance(v, list) and v and all(isinstance(x, str) and x.strip() for x in v):
            return None
        return describe(v), want
    if k.kind == "stage_names":
        ok = isinstance(v, Mapping) and all(
            isinstance(t, Mapping) and all(is_int(x) and x >= 0 for x in t.values())
            for t in v.values())
        return None if ok else (describe(v), want)
    if not isinstance(v, list):
        return describe(v), want
    if k.kind == "years" and v == []:
        return None
    if not v and not k.empty:
        return "an empty list", want
    if k.kind == "ladder":
        ok = all((isinstance(x, str) and x.strip()) or is_int(x) for x in v)
        return None if ok else (describe(v), want)
    item = Key(_ITEM_KIND[k.kind], k.lo, k.hi, k.open_lo, k.open_hi, k.choices)
    if not all(_scalar_ok(x, item) for x in v):
        return describe(v), want
    if k.kind in ("years", "pair"):
        if len(v) != 2 or v[0] > v[1]:
            return describe(v), want
    if k.order == "unique" and len(set(v)) != len(v):
        return f"{toml_text(v)} (a value repeats)", want
    if k.order == "increasing" and any(b <= a for a, b in zip(v, v[1:], strict=False)):
        return f"{toml_text(v)} (not strictly increasing)", want
    if k.order == "decreasing" and any(b >= a for a, b in zip(v, v[1:], strict=False)):
        return f"{toml_text(v)} (not strictly decreasing, mildest stage first)", want
    return None


_ITEM_KIND: dict[str, Kind] = {"ints": "int", "numbers": "number", "texts": "text",
                               "years": "int", "pair": "int"}


def _scalar_ok(v: Any, k: Key) -> bool:
    if k.kind == "bool":
        return isinstance(v, bool)
    if k.kind == "text":
        return isinstance(v, str) and bool(v.strip()) and (not k.choices or v in k.choices)
    if k.kind == "int" and not is_int(v):
        return False
    if k.kind == "number" and not (_is_number(v) and v == v and abs(v) != float("inf")):
        return False
    if k.lo is not None and (v < k.lo or (k.open_lo and v == k.lo)):
        return False
    return not (k.hi is not None and (v > k.hi or (k.open_hi and v == k.hi)))


def is_int(v: Any) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _is_number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _want(k: Key) -> str:
    rng = _range(k)
    if k.kind == "int":
        return f"a whole number{rng}"
    if k.kind == "number":
        return f"a number{rng}"
    if k.kind == "bool":
        return "true or false (no quotes)"
    if k.kind == "text":
        return ("one of " + ", ".join(f'"{c}"' for c in k.choices)) if k.choices else "a text"
    if k.kind == "text_or_texts":
        return "a text or a list of texts"
    if k.kind == "years":
        return f"[first, last] whole years{rng} with first <= last, or []"
    if k.kind == "pair":
        return f"[lowest, highest] whole numbers{rng}"
    if k.kind == "ladder":
        return "a list of level names or numbers, mildest first"
    if k.kind == "stage_names":
        return "issuer -> { stage name = whole level >= 0 }"
    what = {"ints": "whole numbers", "numbers": "numbers", "texts": "texts"}[k.kind]
    if k.choices:
        what += " from " + ", ".join(f'"{c}"' for c in k.choices)
    order = {"increasing": ", strictly increasing", "decreasing": ", strictly decreasing",
             "unique": ", each once"}.get(k.order, "")
    return f"a{'' if k.empty else ' non-empty'} list of {what}{rng}{order}"


def _range(k: Key) -> str:
    lo, hi = k.lo, k.hi
    fmt = "{:g}".format
    if lo is not None and hi is not None:
        if k.open_lo or k.open_hi:
            return f" {'above' if k.open_lo else 'from'} {fmt(lo)} and " \
                   f"{'below' if k.open_hi else 'up to'} {fmt(hi)}"
        return f" from {fmt(lo)} to {fmt(hi)}"
    if lo is not None:
        return f" {'>' if k.open_lo else '>='} {fmt(lo)}"
    return ""


def _suggest(key: str, v: Any, k: Key) -> str:
    """What to write instead: the value coerced when that gives a valid value, else an
    example."""
    fixed = _coerce(v, k)
    if fixed is not None and _kind_problem(fixed, k) is None:
        note = " (no quotes)" if isinstance(v, str) and not isinstance(fixed, str) else ""
        return f"write {key} = {toml_text(fixed)}{note}"
    return f"write e.g. {key} = {k.example}" if k.example else f"correct {key}"


def _coerce(v: Any, k: Key) -> Any:
    if k.kind == "bool" and isinstance(v, str) and v.strip().lower() in ("true", "false"):
        return v.strip().lower() == "true"
    if k.kind in ("int", "number") and isinstance(v, str):
        return _number(v, k.kind == "int")
    if k.kind == "int" and isinstance(v, float) and v.is_integer():
        return int(v)
    if k.kind in ("ints", "numbers", "texts"):
        items = v
        if isinstance(v, str):
            items = [s for s in v.replace(";", ",").split(",") if s.strip()]
        elif not isinstance(v, list):
            items = [v]
        if k.kind == "texts":
            return [x.strip() for x in items] if all(isinstance(x, str) for x in items) else None
        nums = [x if _is_number(x) and not (k.kind == "ints" and isinstance(x, float))
                else _number(str(x), k.kind == "ints") for x in items]
        if any(x is None for x in nums):
            return None
        if k.order == "increasing":
            return sorted(set(nums))
        if k.order == "decreasing":
            return sorted(set(nums), reverse=True)
        if k.order == "unique":
            return list(dict.fromkeys(nums))
        return nums
    return None


def _number(s: str, whole: bool) -> Any:
    try:
        x = float(s.strip())
    except ValueError:
        return None
    if whole:
        return int(x) if x.is_integer() else None
    return int(x) if x.is_integer() else x


def as_list(v: Any) -> list[Any]:
    return list(v) if isinstance(v, (list, tuple)) else []


def describe(v: Any) -> str:
    """How a value was written, as the user would recognise it."""
    if isinstance(v, str):
        return f"{toml_text(v)} (text)"
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return toml_text(v)
    if isinstance(v, list):
        return f"{toml_text(v)} (a list)" if len(repr(v)) < 80 else "a list"
    if isinstance(v, Mapping):
        return "a table"
    if isinstance(v, (_dt.date, _dt.time, _dt.datetime)):
        return f"{v.isoformat()} (a date or time)"
    return type(v).__name__


def toml_text(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return repr(v)
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(toml_text(x) for x in v) + "]"
    if isinstance(v, Mapping):
        return "{ " + ", ".join(f"{toml_text(str(k))} = {toml_text(x)}" for k, x in v.items()) + " }"
    if isinstance(v, (_dt.date, _dt.time, _dt.datetime)):
        return v.isoformat()
    raise TypeError(f"cannot write {type(v).__name__} to TOML")
