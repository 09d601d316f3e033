"""Trigger-plan files: a committee's staged drought plan written as TOML, read into frozen
dataclasses.

A plan names its indicators, an ordered list of stages (mildest first, names chosen by the
plan's authors), and for each stage the rules that enter it, how the rules combine, how long
they must hold, and the slower rule that leaves it. ``scenario_data/trigger_plan.toml`` is a
commented example. Every key is checked; all problems are reported at once, in one line, each
naming the file, the key, what was found and what to write.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

from impactlink.errors import TriggerError

__all__ = [
    "TriggerPlan",
    "PlanIndicator",
    "PlanRule",
    "PlanOverride",
    "PlanStage",
    "PlanScoring",
    "PlanTuning",
    "load_trigger_plan",
    "parse_trigger_plan",
    "SEASON_MONTHS",
]

Direction = Literal["low", "high"]
ThresholdKind = Literal["value", "percentile", "percent_of_normal"]
Combine = Literal["all", "any", "k_of_n", "weights"]
Unit = Literal["county", "region", "counties"]
Objective = Literal["peirce", "economic_value", "frequency"]

#: Months of each named season (meteorological seasons, common practice).
SEASON_MONTHS = {
    "winter": (12, 1, 2),
    "spring": (3, 4, 5),
    "summer": (6, 7, 8),
    "autumn": (9, 10, 11),
}


@dataclass(frozen=True)
class PlanIndicator:
    """One indicator a plan reads: an index of the cube at one time scale.

    ``dry`` says which side is dry: "low" (SPI, SPEI, soil moisture, streamflow) or "high"
    (EDDI). ``scale_weeks`` is 0 for an indicator used as supplied.
    """

    name: str
    index: str
    scale_weeks: int
    dry: Direction = "low"


@dataclass(frozen=True)
class PlanOverride:
    """A threshold that replaces the rule's own in some months and/or one region.

    ``months`` empty = every month; ``region`` None = every region. Later overrides win.
    ``enter`` / ``exit`` None keep the rule's value.
    """

    months: tuple[int, ...] = ()
    region: str | None = None
    enter: float | None = None
    exit: float | None = None


@dataclass(frozen=True)
class PlanRule:
    """One indicator test of a stage.

    ``kind`` says what the numbers are: "value" (index units), "percentile" (0-100, of the
    unit's own record), "percent_of_normal" (100 = the unit's mean for that week of the year).
    A week is *beyond* the entry threshold when the indicator is at or past it on the dry side;
    ``exit`` is the (less severe) level the indicator must be back across to count toward exit.
    """

    indicator: str
    kind: ThresholdKind
    enter: float
    exit: float
    weight: float = 1.0
    overrides: tuple[PlanOverride, ...] = ()


@dataclass(frozen=True)
class PlanStage:
    """One stage of the ladder (stages are ordered mildest first).

    Entry: the combination of rules (``combine``: all, any, at least ``k`` of n, or a weight sum
    of at least ``min_weight``) holds in ``enter_weeks`` of the last ``enter_window`` weeks
    (``enter_window == enter_weeks``: consecutive weeks). Exit: the combination evaluated at the
    exit thresholds fails in ``exit_weeks`` consecutive weeks while in the stage, and the stage
    has lasted ``min_weeks``; the plan then steps down one stage.
    """

    name: str
    rules: tuple[PlanRule, ...]
    combine: Combine = "all"
    k: int = 1
    min_weight: float = 0.0
    enter_weeks: int = 2
    enter_window: int = 2
    exit_weeks: int = 4
    min_weeks: int = 0


@dataclass(frozen=True)
class PlanScoring:
    """How the plan is scored against an impact (``[score]``)."""

    impact: str | None = None
    min_level: int = 1
    window_weeks: int = 8
    flip_weeks: int = 8
    exposure: Literal["none", "water_systems"] = "none"


@dataclass(frozen=True)
class PlanTuning:
    """Threshold search for one rule of one stage (``[tune]``); None fields = not asked for."""

    stage: str
    rule: str
    candidates: tuple[float, ...]
    enter_weeks: tuple[int, ...]
    objective: Objective = "peirce"
    cost_loss_ratio: float = 0.2
    once_in_years: float = 5.0
    n_boot: int = 200
    ci: float = 0.9
    local_percentile: float | None = None


@dataclass(frozen=True)
class TriggerPlan:
    """A validated trigger plan (see :func:`parse_trigger_plan`)."""

    name: str
    source: str
    unit: Unit
    indicators: tuple[PlanIndicator, ...]
    stages: tuple[PlanStage, ...]
    counties: tuple[str, ...] = ()
    unit_name: str = "plan area"
    scoring: PlanScoring = field(default_factory=PlanScoring)
    tuning: PlanTuning | None = None

    def indicator(self, name: str) -> PlanIndicator:
        return next(i for i in self.indicators if i.name == name)

    @property
    def stage_names(self) -> tuple[str, ...]:
        return tuple(s.name for s in self.stages)


def load_trigger_plan(path: str | Path) -> TriggerPlan:
    """Read and validate a trigger-plan TOML file.

    Raises
    ------
    TriggerError
        If the file is missing, is not TOML, or has any invalid key (all listed in one line).
    """
    p = Path(path)
    try:
        raw = tomllib.loads(p.read_text(encoding="utf-8-sig"))  # "-sig": a BOM is dropped
    except FileNotFoundError:
        raise TriggerError(f"{p}: trigger-plan file not found; check the path.") from None
    except tomllib.TOMLDecodeError as exc:
        raise TriggerError(f"{p}: not valid TOML ({exc}); fix the syntax.") from None
    return parse_trigger_plan(raw, source=str(p))


def parse_trigger_plan(raw: dict[str, Any], *, source: str = "<plan>") -> TriggerPlan:
    """Validate a plan given as a dict (parsed TOML) and build the :class:`TriggerPlan`.

    Parameters
    ----------
    raw : dict
        Tables ``[plan]``, ``[indicators.NAME]``, ``[[stage]]`` with ``[[stage.rule]]`` and
        optional ``[[stage.rule.override]]``, ``[score]``, ``[tune]`` (see the example plan).
    source : str
        File name used in messages.

    Returns
    -------
    TriggerPlan

    Raises
    ------
    TriggerError
        Listing every problem found, separated by " | ", in one line.

    Examples
    --------
    >>> plan = parse_trigger_plan({
    ...     "plan": {"name": "demo"},
    ...     "indicators": {"spi13": {"index": "spi", "scale_weeks": 13}},
    ...     "stage": [{"name": "watch", "rule": [{"indicator": "spi13", "enter": -1.0,
    ...                                           "exit": -0.5}]}]})
    >>> plan.stages[0].rules[0].kind, plan.unit
    ('value', 'county')
    """
    c = _Checker(source)
    top = c.table(raw, "", {"plan", "indicators", "stage", "score", "tune"})
    head = c.table(top.get("plan", {}), "plan",
                   {"name", "unit", "counties", "unit_name"})
    name = c.string(head, "plan.name", default="trigger plan")
    unit = c.choice(head, "plan.unit", ("county", "region", "counties"), default="county")
    counties = tuple(c.strings(head, "plan.counties", default=[]))
    if unit == "counties" and not counties:
        c.problem("plan.counties", "missing", 'write the county ids of the plan area, e.g. '
                  'counties = ["90001", "90003"] (needed with unit = "counties")')
    indicators = _indicators(c, top.get("indicators"))
    known = {i.name: i for i in indicators}
    stages_raw = top.get("stage")
    if not isinstance(stages_raw, list) or not stages_raw:
        c.problem("stage", "no [[stage]] table", "add one [[stage]] per stage, mildest first")
        stages_raw = []
    stages = tuple(_stage(c, s, i, known) for i, s in enumerate(stages_raw, start=1))
    names = [s.name for s in stages]
    if len(set(names)) != len(names):
        c.problem("stage.name", f"repeated names {names}", "give every stage its own name")
    scoring = _scoring(c, top.get("score", {}))
    tuning = _tuning(c, top["tune"], stages) if "tune" in top else None
    unit_name = c.string(head, "plan.unit_name", default=name)
    c.raise_if_any()
    return TriggerPlan(
        name=name, source=source, unit=unit, indicators=indicators, stages=stages,
        counties=counties, unit_name=unit_name, scoring=scoring, tuning=tuning,
    )


# --------------------------------------------------------------------------- private steps
def _indicators(c: _Checker, raw: Any) -> tuple[PlanIndicator, ...]:
    if not isinstance(raw, dict) or not raw:
        c.problem("indicators", "missing or empty", 'add [indicators.NAME] with index = "spei" '
                  "and scale_weeks = 26")
        return ()
    out = []
    for nm, spec in raw.items():
        key = f"indicators.{nm}"
        t = c.table(spec, key, {"index", "scale_weeks", "dry"})
        out.append(PlanIndicator(
            name=str(nm),
            index=c.string(t, f"{key}.index", default=None) or "",
            scale_weeks=c.integer(t, f"{key}.scale_weeks", minimum=0, default=None) or 0,
            dry=c.choice(t, f"{key}.dry", ("low", "high"), default="low"),
        ))
    return tuple(out)


def _stage(c: _Checker, raw: Any, i: int, known: dict[str, PlanIndicator]) -> PlanStage:
    key = f"stage[{i}]"
    t = c.table(raw, key, {"name", "combine", "k", "min_weight", "enter_weeks",
                           "enter_window", "exit_weeks", "min_weeks", "rule"})
    name = c.string(t, f"{key}.name", default=None) or f"stage_{i}"
    key = f'stage[{i}] ("{name}")'
    rules_raw = t.get("rule")
    if not isinstance(rules_raw, list) or not rules_raw:
        c.problem(f"{key}.rule", "no [[stage.rule]]", "add at least one [[stage.rule]] with "
                  "indicator, enter and exit")
        rules_raw = []
    rules = tuple(_rule(c, r, f"{key}.rule[{j}]", known)
                  for j, r in enumerate(rules_raw, start=1))
    combine = c.choice(t, f"{key}.combine", ("all", "any", "k_of_n", "weights"), default="all")
    k = c.integer(t, f"{key}.k", minimum=1, default=1) or 1
    if combine == "k_of_n" and "k" not in t:
        c.problem(f"{key}.k", "missing", 'write k = 2 (how many rules must hold) with '
                  'combine = "k_of_n"')
    if combine == "k_of_n" and rules and k > len(rules):
        c.problem(f"{key}.k", f"{k} but the stage has {len(rules)} rules",
                  f"write a k between 1 and {len(rules)}")
    min_weight = c.number(t, f"{key}.min_weight", default=0.0)
    if combine == "weights" and "min_weight" not in t:
        c.problem(f"{key}.min_weight", "missing", "write min_weight = 1.5 (the weight sum of "
                  'rules that must hold) with combine = "weights"')
    enter_weeks = c.integer(t, f"{key}.enter_weeks", minimum=1, default=2) or 2
    window = c.integer(t, f"{key}.enter_window", minimum=1, default=enter_weeks) or enter_weeks
    if window < enter_weeks:
        c.problem(f"{key}.enter_window", f"{window} < enter_weeks {enter_weeks}",
                  "write an enter_window of at least enter_weeks (equal = consecutive weeks)")
    return PlanStage(
        name=name, rules=rules, combine=combine, k=k, min_weight=min_weight,
        enter_weeks=enter_weeks, enter_window=window,
        exit_weeks=c.integer(t, f"{key}.exit_weeks", minimum=1, default=4) or 4,
        min_weeks=c.integer(t, f"{key}.min_weeks", minimum=0, default=0) or 0,
    )


def _rule(c: _Checker, raw: Any, key: str, known: dict[str, PlanIndicator]) -> PlanRule:
    t = c.table(raw, key, {"indicator", "kind", "enter", "exit", "weight", "override"})
    ind = c.string(t, f"{key}.indicator", default=None) or ""
    if ind and known and ind not in known:
        c.problem(f"{key}.indicator", f"{ind!r} is not defined",
                  f"write one of {sorted(known)} or add [indicators.{ind}]")
    kind = c.choice(t, f"{key}.kind", ("value", "percentile", "percent_of_normal"),
                    default="value")
    enter = c.number(t, f"{key}.enter", default=None)
    exit_ = c.number(t, f"{key}.exit", default=enter)
    dry = known[ind].dry if ind in known else "low"
    overrides = []
    for j, o in enumerate(t.get("override", []) or [], start=1):
        overrides.append(_override(c, o, f"{key}.override[{j}]"))
    for where, e, x in [(key, enter, exit_)] + [
        (f"{key}.override[{j}]", o.enter if o.enter is not None else enter,
         o.exit if o.exit is not None else exit_) for j, o in enumerate(overrides, start=1)
    ]:
        if e is None or x is None:
            continue
        if kind == "percentile" and not (0 <= e <= 100 and 0 <= x <= 100):
            c.problem(f"{where}.enter", f"percentiles {e}, {x}", "write percentiles in 0-100")
        if (dry == "low" and x < e) or (dry == "high" and x > e):
            side = "at or above" if dry == "low" else "at or below"
            c.problem(f"{where}.exit", f"{x} is more severe than enter {e}",
                      f"write an exit threshold {side} the entry threshold (dry = {dry!r})")
    return PlanRule(indicator=ind, kind=kind, enter=enter if enter is not None else 0.0,
                    exit=exit_ if exit_ is not None else 0.0,
                    weight=c.number(t, f"{key}.weight", default=1.0), overrides=tuple(overrides))


def _override(c: _Checker, raw: Any, key: str) -> PlanOverride:
    t = c.table(raw, key, {"months", "season", "region", "enter", "exit"})
    months = tuple(c.integers(t, f"{key}.months", default=[]))
    if any(m < 1 or m > 12 for m in months):
        c.problem(f"{key}.months", f"{list(months)}", "write months as numbers 1-12")
    if "season" in t:
        season = c.choice(t, f"{key}.season", tuple(SEASON_MONTHS), default="summer")
        months = tuple(sorted(set(months) | set(SEASON_MONTHS[season])))
    if "enter" not in t and "exit" not in t:
        c.problem(key, "neither enter nor exit", "write enter = ... and/or exit = ...")
    return PlanOverride(months=months, region=c.string(t, f"{key}.region", default=None),
                        enter=c.number(t, f"{key}.enter", default=None),
                        exit=c.number(t, f"{key}.exit", default=None))


def _scoring(c: _Checker, raw: Any) -> PlanScoring:
    t = c.table(raw, "score", {"impact", "min_level", "window_weeks", "flip_weeks", "exposure"})
    return PlanScoring(
        impact=c.string(t, "score.impact", default=None),
        min_level=c.integer(t, "score.min_level", minimum=1, default=1) or 1,
        window_weeks=c.integer(t, "score.window_weeks", minimum=0, default=8) or 0,
        flip_weeks=c.integer(t, "score.flip_weeks", minimum=1, default=8) or 8,
        exposure=c.choice(t, "score.exposure", ("none", "water_systems"), default="none"),
    )


def _tuning(c: _Checker, raw: Any, stages: tuple[PlanStage, ...]) -> PlanTuning | None:
    t = c.table(raw, "tune", {"stage", "rule", "candidates", "enter_weeks", "objective",
                              "cost_loss_ratio", "once_in_years", "n_boot", "ci",
                              "local_percentile"})
    stage = c.string(t, "tune.stage", default=None) or ""
    st = next((s for s in stages if s.name == stage), None)
    if st is None:
        c.problem("tune.stage", f"{stage!r}", f"write one of {[s.name for s in stages]}")
    rule = c.string(t, "tune.rule", default=None) or ""
    if st is not None and rule not in [r.indicator for r in st.rules]:
        c.problem("tune.rule", f"{rule!r} is not a rule of stage {stage!r}",
                  f"write one of {[r.indicator for r in st.rules]}")
    cands = tuple(c.numbers(t, "tune.candidates", default=[]))
    if not cands:
        c.problem("tune.candidates", "missing or empty", "write candidates = [5, 10, 15, 20] "
                  "(thresholds in the rule's kind)")
    ratio = c.number(t, "tune.cost_loss_ratio", default=0.2)
    if not 0 < ratio < 1:
        c.problem("tune.cost_loss_ratio", f"{ratio}", "write a ratio C/L between 0 and 1")
    ci = c.number(t, "tune.ci", default=0.9)
    if not 0 < ci < 1:
        c.problem("tune.ci", f"{ci}", "write a coverage between 0 and 1, e.g. 0.9")
    persist = c.integers(t, "tune.enter_weeks", default=[])
    if any(p < 1 for p in persist):
        c.problem("tune.enter_weeks", f"{persist}", "write whole numbers of weeks >= 1")
    once = c.number(t, "tune.once_in_years", default=5.0)
    if once <= 0:
        c.problem("tune.once_in_years", f"{once}", "write a positive number of years, e.g. 5")
    lp = c.number(t, "tune.local_percentile", default=None)
    if lp is not None and not 0 < lp < 100:
        c.problem("tune.local_percentile", f"{lp}", "write a percentile between 0 and 100")
    return PlanTuning(
        stage=stage, rule=rule, candidates=cands,
        enter_weeks=tuple(persist),
        objective=c.choice(t, "tune.objective", ("peirce", "economic_value", "frequency"),
                           default="peirce"),
        cost_loss_ratio=ratio, once_in_years=once,
        n_boot=c.integer(t, "tune.n_boot", minimum=0, default=200) or 0, ci=ci,
        local_percentile=lp,
    )


class _Checker:
    """Collects problems while reading keys, so that all of them are reported at once."""

    def __init__(self, source: str) -> None:
        self.source = source
        self.problems: list[str] = []

    def problem(self, key: str, found: str, fix: str) -> None:
        self.problems.append(f"key {key}: {found}; {fix}")

    def raise_if_any(self) -> None:
        if self.problems:
            n = len(self.problems)
            raise TriggerError(f"{self.source}: {n} problem{'s' * (n > 1)} in the trigger plan: "
                               + " | ".join(self.problems))

    def table(self, raw: Any, key: str, allowed: set[str]) -> dict:
        if not isinstance(raw, dict):
            self.problem(key or "(top)", f"a {type(raw).__name__}", "write a TOML table")
            return {}
        for k in sorted(set(raw) - allowed):
            where = f"{key}.{k}" if key else k
            self.problem(where, "unknown key", f"remove it or write one of {sorted(allowed)}")
        return raw

    def string(self, t: dict, key: str, *, default: str | None) -> Any:
        v = t.get(key.rsplit(".", 1)[-1], default)
        if v is None and default is None and key.rsplit(".", 1)[-1] in ("index", "name",
                                                                        "indicator", "stage",
                                                                        "rule"):
            self.problem(key, "missing", "write a name in quotes")
            return None
        if v is not None and not isinstance(v, str):
            self.problem(key, f"{v!r}", "write a string in quotes")
            return default
        return v

    def strings(self, t: dict, key: str, *, default: list) -> list[str]:
        v = t.get(key.rsplit(".", 1)[-1], default)
        if not isinstance(v, list) or not all(isinstance(x, (str, int)) for x in v):
            self.problem(key, f"{v!r}", 'write a list of strings, e.g. ["90001", "90003"]')
            return default
        return [str(x) for x in v]

    def choice(self, t: dict, key: str, allowed: tuple[str, ...], *, default: str) -> Any:
        v = t.get(key.rsplit(".", 1)[-1], default)
        if v not in allowed:
            self.problem(key, f"{v!r}", f"write one of {', '.join(allowed)}")
            return default
        return v

    def number(self, t: dict, key: str, *, default: float | None) -> Any:
        leaf = key.rsplit(".", 1)[-1]
        v = t.get(leaf, default)
        if v is None and leaf == "enter" and default is None and "override" not in key:
            self.problem(key, "missing", "write the entry threshold as a number")
            return None
        if v is not None and (isinstance(v, bool) or not isinstance(v, (int, float))):
            self.problem(key, f"{v!r}", "write a number")
            return default
        return None if v is None else float(v)

    def numbers(self, t: dict, key: str, *, default: list) -> list[float]:
        v = t.get(key.rsplit(".", 1)[-1], default)
        if not isinstance(v, list) or any(isinstance(x, bool) or not isinstance(x, (int, float))
                                          for x in v):
            self.problem(key, f"{v!r}", "write a list of numbers, e.g. [5, 10, 15]")
            return default
        return [float(x) for x in v]

    def integer(self, t: dict, key: str, *, minimum: int, default: int | None) -> int | None:
        leaf = key.rsplit(".", 1)[-1]
        v = t.get(leaf, default)
        if v is None:
            if leaf == "scale_weeks":
                self.problem(key, "missing", "write the time scale in weeks (0 = as supplied)")
            return None
        if isinstance(v, bool) or not isinstance(v, int) or v < minimum:
            self.problem(key, f"{v!r}", f"write a whole number >= {minimum}")
            return default
        return int(v)

    def integers(self, t: dict, key: str, *, default: list) -> list[int]:
        v = t.get(key.rsplit(".", 1)[-1], default)
        if not isinstance(v, list) or any(isinstance(x, bool) or not isinstance(x, int)
                                          for x in v):
            self.problem(key, f"{v!r}", "write a list of whole numbers, e.g. [1, 2, 3]")
            return default
        return [int(x) for x in v]
