"""A small fake run folder built from synthetic frames (invented numbers: these tests check
rendering, not science)."""

from __future__ import annotations

import json
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from shapely.geometry import box

COUNTY_NAMES = ["Alder Bend", "Brackwater", "Cinder Flats", "Dunmore Hollow", "Elkwash", "Fenrow"]


def make_fake_run(folder: Path, *, county_names=None, issuer="Tallow Creek Water Board",
                  skip=()) -> Path:
    """Write a complete fake run folder into ``folder`` and return it.

    ``skip`` names files (e.g. "skill.csv") not to write.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(7)
    names = list(county_names or COUNTY_NAMES)
    ids = [f"9{k:04d}" for k in range(len(names))]  # leading 9, kept as text

    def write(name: str, frame: pd.DataFrame) -> None:
        if name not in skip:
            frame.to_csv(folder / name, index=False)

    counties = gpd.GeoDataFrame(
        {"county_id": ids, "county_name": names,
         "region": ["Upland" if k < 3 else "Lowland" for k in range(len(names))]},
        geometry=[box(k % 3, k // 3, k % 3 + 1, k // 3 + 1) for k in range(len(names))],
        crs="EPSG:4326",
    )
    if "counties.gpkg" not in skip:
        counties.to_file(folder / "counties.gpkg", layer="counties", driver="GPKG")
        best = pd.DataFrame(
            [(c, imp, tgt, ix, 13, 4, rng.uniform(0, 0.4), int(rng.integers(3, 30)))
             for c in ids for imp, tgt in (("crop_shortfall", "shortfall_class"),
                                           ("restrictions", "state"))
             for ix in [rng.choice(["spi", "spei", "eddi"])]],
            columns=["county_id", "impact", "target", "index", "scale_weeks", "lag_weeks",
                     "skill", "events"],
        )
        gpd.GeoDataFrame(best.merge(counties[["county_id", "geometry"]]), crs="EPSG:4326").to_file(
            folder / "counties.gpkg", layer="best_candidate", driver="GPKG")

    targets = [("crop_shortfall", "shortfall_class", "ordinal", "rpss", "primary"),
               ("restrictions", "state", "binary", "bss", "primary"),
               ("restrictions", "onset", "binary", "bss", "secondary"),
               ("restrictions", "escalation", "binary", "bss", "secondary")]
    rows = []
    for imp, tgt, kind, _score, _ in targets:
        model = "ordinal_logit" if kind == "ordinal" else "logistic"
        for ix in ("spi", "spei", "eddi"):
            for sc in (4, 8, 13, 26):
                for lag in (0, 4, 8):
                    s = 0.3 - 0.004 * abs(sc - 13) ** 1.5 - 0.01 * lag + rng.normal(0, 0.02)
                    rows.append(dict(impact=imp, target=tgt, role="candidate", index=ix,
                                     scale_weeks=sc, lag_weeks=lag, model=model, score=s))
        for m, s in (("climatology", 0.0), ("seasonal", 0.05), ("persistence", 0.12)):
            rows.append(dict(impact=imp, target=tgt, role="baseline", index=None,
                             scale_weeks=None, lag_weeks=None, model=m, score=s))
        if imp == "restrictions":
            rows.append(dict(impact=imp, target=tgt, role="challenger", index="spi",
                             scale_weeks=13, lag_weeks=4, model="index_plus_persistence",
                             score=0.36))
    skill = pd.DataFrame(rows)
    skill["index2"] = pd.NA
    skill["scale2_weeks"] = np.nan
    skill["events"] = 40
    skill["n"] = 600
    skill["n_years"] = 30
    for col in ("bss", "rpss"):
        skill[col] = np.where(skill.merge(pd.DataFrame(
            [(t[0], t[1], t[3]) for t in targets], columns=["impact", "target", "sn"]),
            how="left")["sn"] == col, skill["score"], np.nan)
        skill[f"{col}_lo"] = skill[col] - 0.08
        skill[f"{col}_hi"] = skill[col] + 0.08
    skill["brier"] = 0.2 - skill["score"] / 10
    skill["brier_lo"] = skill["brier"] - 0.02
    skill["brier_hi"] = skill["brier"] + 0.02
    skill["roc_auc"] = 0.6 + skill["score"] / 2
    skill["roc_auc_lo"] = skill["roc_auc"] - 0.05
    skill["roc_auc_hi"] = skill["roc_auc"] + 0.05
    skill["log_loss"] = 0.5
    skill["rps"] = 0.1
    skill["calibration_slope"] = 1.0
    skill["rank"] = skill.groupby(["impact", "target"])["score"].rank(ascending=False)
    cand = skill["score"].where(skill["model"] != "index_plus_persistence")
    best_score = cand.groupby([skill["impact"], skill["target"]]).transform("max")
    skill["indistinguishable_from_best"] = (skill["score"] > best_score - 0.03) & skill["index"].notna()
    skill["beats_climatology"] = skill["score"] - 0.08 > 0
    skill["beats_seasonal"] = skill["score"] - 0.08 > 0.05
    skill["beats_persistence"] = skill["score"] - 0.08 > 0.12
    write("skill.csv", skill.drop(columns="score"))

    summary = []
    for imp, tgt, kind, score, role in targets:
        sub = skill[(skill.impact == imp) & (skill.target == tgt) & skill["index"].notna()
                    & (skill.model != "index_plus_persistence")]
        b = sub.loc[sub["score"].idxmax()]
        summary.append(dict(
            impact=imp, target=tgt, role=role, kind=kind, best_index=b["index"],
            best_scale_weeks=b["scale_weeks"], best_lag_weeks=b["lag_weeks"], best_model=b["model"],
            ranking_score=score, **{f"naive_{score}": b["score"],
                                    f"nested_{score}": b["score"] - 0.05,
                                    f"nested_{score}_lo": b["score"] - 0.13,
                                    f"nested_{score}_hi": b["score"] + 0.03},
            n_candidates=len(sub),
            n_indistinguishable=int(sub["indistinguishable_from_best"].sum()), events=40, n=600,
            persistence_gain=0.06 if imp == "restrictions" else np.nan,
            persistence_gain_lo=0.01 if imp == "restrictions" else np.nan,
            persistence_gain_hi=0.11 if imp == "restrictions" else np.nan,
            index_adds_skill=True if imp == "restrictions" else pd.NA,
        ))
    write("skill_summary.csv", pd.DataFrame(summary))

    rel = []
    for imp, tgt, *_ in targets:
        for model in ("logistic", "climatology"):
            for b in range(10):
                f = (b + 0.5) / 10
                rel.append(dict(impact=imp, target=tgt, model=model, bin=b, mean_forecast=f,
                                observed_frequency=float(np.clip(f + rng.normal(0, 0.05), 0, 1)),
                                n=int(rng.integers(5, 80))))
    write("reliability.csv", pd.DataFrame(rel))

    x = np.linspace(-3, 3, 41)
    curves, crossings = [], []
    for imp, tgt, kind, *_ in targets:
        levels = [(1, "minor"), (2, "major")] if kind == "ordinal" else [(1, "any")]
        for k, lab in levels:
            p = 1 / (1 + np.exp(2 * (x + k - 0.5)))
            for xi, pi in zip(x, p, strict=True):
                curves.append(dict(impact=imp, target=tgt, index="spi", scale_weeks=13, lag_weeks=4,
                                   model="logistic", pooling="all", unit="all", level_k=k,
                                   level_label=lab, x=xi, prob=pi, prob_lo=pi * 0.8,
                                   prob_hi=min(1, pi * 1.2)))
            for pl in (0.1, 0.25, 0.5):
                xc = np.log(1 / pl - 1) / 2 - k + 0.5
                crossings.append(dict(impact=imp, target=tgt, level_k=k, level_label=lab,
                                      prob_level=pl, x_cross=xc, x_lo=xc - 0.2, x_hi=xc + 0.2))
    write("curves.csv", pd.DataFrame(curves))
    write("crossings.csv", pd.DataFrame(crossings))

    audit = []
    for c in ids:
        for st, thr, exp in (("dry_watch", -1.0, 0.159), ("dry_warning", -1.5, 0.067),
                             ("dry_emergency", -2.0, 0.023)):
            for period in ("record", "early", "late"):
                obs = exp * rng.uniform(0.6, 1.6)
                audit.append(dict(county_id=c, ladder="spi_ladder", index="spi", scale_weeks=13,
                                  stage=st, period=period, threshold=thr, expected_share=exp,
                                  observed_share=obs, ratio=obs / exp, ratio_lo=obs / exp - 0.3,
                                  ratio_hi=obs / exp + 0.3, local_threshold=thr + rng.normal(0, 0.2),
                                  local_threshold_lo=thr - 0.4, local_threshold_hi=thr + 0.4,
                                  weeks=1500))
    write("audit.csv", pd.DataFrame(audit))

    outlook = []
    for c in ids:
        for h in (0, 4):
            outlook.append(dict(county_id=c, impact="restrictions", target="state", index="spi",
                                scale_weeks=13, lag_weeks=4, horizon_weeks=h,
                                as_of_week="2025-06-02", level_k=1, level_label="any",
                                prob=rng.uniform(0, 1), prob_lo=0.0, prob_hi=1.0))
    write("outlook.csv", pd.DataFrame(outlook))

    trig = []
    for scope, base_thr in (("uniform", -1.2), ("local", None)):
        for c in ids + ["all"]:
            thr = base_thr if base_thr is not None else (
                -1.2 + rng.normal(0, 0.3) if c != "all" else np.nan)
            trig.append(dict(county_id=c, region="", scope=scope, index="spi", scale_weeks=13,
                             threshold=thr, entry_weeks=2, exit_weeks=4, weeks_on_share=0.1,
                             below_share=0.1, nominal_share=0.1, activations=12,
                             hit_rate=0.6 if scope == "local" else 0.5,
                             false_alarm_ratio=0.3, peirce_skill=0.4 if scope == "local" else 0.35,
                             csi=0.4, lead_weeks_median=3, lead_weeks_q1=1, lead_weeks_q3=6,
                             events=9, cv_peirce_skill=0.33 if scope == "local" else 0.34))
    trig = pd.DataFrame(trig)
    trig.insert(0, "target", "restrictions:state")
    trig.insert(0, "impact", "restrictions")
    write("triggers.csv", trig)
    weeks = pd.date_range("2000-01-03", periods=520, freq="7D")
    wave = np.sin(np.arange(520) / 20.0) * 1.5
    tl = []
    for c in ids[:2]:
        for scope, thr in (("uniform", -1.2), ("local", -1.0)):
            tl.append(pd.DataFrame(dict(week=weeks, county_id=c, scope=scope, index_value=wave,
                                        threshold=thr, trigger_on=wave < thr,
                                        impact_level=(wave < -1.3).astype(float))))
    tl = pd.concat(tl, ignore_index=True)
    tl.insert(0, "target", "restrictions:state")
    write("trigger_timeline.csv", tl)
    con = pd.DataFrame(dict(term=["index", "irrigated_share", "storage_days"],
                            odds_ratio_per_sd=[2.5, 0.7, 0.9], or_lo=[1.8, 0.5, 0.6],
                            or_hi=[3.4, 0.95, 1.3], p_value=[0.001, 0.02, 0.5]))
    con.insert(0, "target", "crop_shortfall:class")
    write("contrast.csv", con)
    write("county_excess.csv", pd.DataFrame(dict(
        target="crop_shortfall:class", county_id=ids, rows=40, events=rng.integers(2, 12, len(ids)),
        expected_events=6.0, ratio=rng.uniform(0.4, 1.8, len(ids)), ratio_lo=0.2, ratio_hi=2.5)))
    write("contrast_pairs.csv", pd.DataFrame(dict(
        target=["crop_shortfall:class"], county_a=[ids[0]], county_b=[ids[1]], gap=[0.1],
        rate_a=[0.3], rate_b=[0.05])))

    write("reconciliation.csv", pd.DataFrame([
        dict(impact="crop_shortfall", table="yields", records=900, used=870, rejected=10,
             outside_coverage=20),
        dict(impact="restrictions", table="notices", records=140, used=120, rejected=5,
             outside_coverage=15),
    ]))
    write("rejected_rows.csv", pd.DataFrame([
        dict(table="notices", file="notices.csv", row=4, column="issuer", value=issuer,
             reason="start_date after end_date"),
        dict(table="climate", file="climate.csv", row=12, column="precip_mm", value="-999",
             reason="missing-value sentinel -999"),
    ]))
    manifest = {
        "impactlink_version": "0.1.0",
        "created_utc": "2026-01-05T10:00:00Z",
        "project": {"name": "Fictional <b>basin</b> study", "seed": 3},
        "seed": 3,
        "inputs": [
            {"table": "climate", "file": "climate.csv", "sha256": "ab" * 32, "rows_read": 1000,
             "rows_used": 999, "rows_rejected": 1, "date_min": "1981-01-01",
             "date_max": "2025-06-01", "counties": len(ids)},
            {"table": "notices", "file": "notices.csv", "sha256": "cd" * 32, "rows_read": 145,
             "rows_used": 140, "rows_rejected": 5, "date_min": "1995-03-01",
             "date_max": "2025-05-20", "counties": len(ids)},
        ],
        "impacts": [{"impact": "restrictions", "table": "notices", "records": 140, "used": 120,
                     "rejected": 5, "outside_coverage": 15}],
        "targets": [{"target": "restrictions:state", "rows": 600, "events": 40}],
        "indices": {"spi": {"method": "SPI, gamma", "calibration": [1991, 2020]},
                    "eddi": {"method": "EDDI, <non-parametric>"}},
        "versions": {"numpy": "2.0", "pandas": "3.0"},
        "timings_s": {"indices": 1.5, "skill": 20.1},
        "warnings": ["3 weeks of climate data missing in county 90001"],
    }
    if "manifest.json" not in skip:
        (folder / "manifest.json").write_text(json.dumps(manifest, indent=1), encoding="utf-8")
    return folder


#: Strings planted in the shared run to prove they are shown as text, never run as markup.
EVIL_COUNTY = '<script>alert("county")</script>'
EVIL_ISSUER = '<img src=x onerror="alert(1)">'
EVIL_STAGE = "</td><b>watch</b>"


@pytest.fixture(scope="session")
def built(tmp_path_factory):
    """One full fake run (with planted markup in a county, issuer, stage and project name),
    built once per session: (run folder, report path, progress messages)."""
    names = list(COUNTY_NAMES)
    names[3] = EVIL_COUNTY
    run = make_fake_run(tmp_path_factory.mktemp("built") / "run", county_names=names,
                        issuer=EVIL_ISSUER)
    audit = pd.read_csv(run / "audit.csv", dtype={"county_id": str})
    audit["stage"] = audit["stage"].replace("dry_watch", EVIL_STAGE)
    audit.to_csv(run / "audit.csv", index=False)
    from impactlink.report import build_report

    messages: list[str] = []
    html = build_report(run, progress=messages.append)
    return run, html, messages


@pytest.fixture
def make_run():
    """The fake-run builder itself, for tests that need other names or missing files."""
    return make_fake_run
