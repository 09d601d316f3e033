"""A synthetic world whose rule is known: three twins of one base county (planted-signal tests).

logit P(impact) = -0.3 - 1.5 x - 4 (irr - 0.3) + 2.5 (irr - 0.3) x + u_c,
x = dryness index (negative = dry), irr = irrigated share; soil_whc_mm has no effect.
County "t0" is the base; "tirr" differs from it only by its irrigated share, "texp" only by
its index values (1.0 drier every year) and "tunx" only by its county effect (u = +2.0).
"""

from dataclasses import replace

import numpy as np
import pandas as pd

from impactlink.link.target import Target

B0, B1, G_IRR, D_IRR, REF_IRR = -0.3, -1.5, -4.0, 2.5, 0.3
TWINS = {"tirr": "sensitivity", "texp": "exposure", "tunx": "unexplained"}


def make_world(seed=0, *, n_counties=40, years=(1961, 2020), u_sd=0.8):
    rng = np.random.default_rng(seed)
    yrs = np.arange(years[0], years[1] + 1)
    ids = [f"c{i:02d}" for i in range(n_counties)] + ["t0", "tirr", "texp", "tunx"]
    n = len(ids)
    irr = np.append(rng.uniform(0.0, 0.6, n_counties), [0.1, 0.55, 0.1, 0.1])
    whc = np.append(rng.uniform(80, 200, n_counties), [140.0, 140.0, 140.0, 140.0])
    u = np.append(rng.normal(0, u_sd, n_counties), [0.0, 0.0, 0.0, 2.0])
    signal = rng.standard_normal(len(yrs))
    x = signal[:, None] + 0.5 * rng.standard_normal((len(yrs), n))
    base = ids.index("t0")
    for twin in ("tirr", "tunx"):
        x[:, ids.index(twin)] = x[:, base]
    x[:, ids.index("texp")] = x[:, base] - 1.0
    eta = (B0 + B1 * x + (G_IRR + D_IRR * x) * (irr - REF_IRR)[None, :] + u[None, :])
    level = (rng.random(eta.shape) < 1 / (1 + np.exp(-eta))).astype(int)
    frame = pd.DataFrame({
        "unit_id": np.tile(ids, len(yrs)), "county_id": np.tile(ids, len(yrs)),
        "region": np.where(np.tile(np.arange(n), len(yrs)) % 2 == 0, "east", "west"),
        "year": np.repeat(yrs, n), "season": 34, "level": level.ravel(),
    })
    frame["time"] = pd.to_datetime(frame["year"].astype(str) + "-01-01")
    frame["departure_pct"] = np.where(frame["level"] == 1, -25.0, 0.0) + rng.normal(
        0, 3, len(frame))
    target = Target(name="maize_shortfall:maize:rainfed", impact="maize_shortfall",
                    kind="binary", grain="county_year", role="annual", frame=frame,
                    levels=("no", "yes"))
    traits = pd.DataFrame({"county_id": ids, "irrigated_share": irr, "soil_whc_mm": whc})
    counties = pd.DataFrame({"county_id": ids, "county_name": [f"Name {c}" for c in ids],
                             "region": frame["region"].iloc[:n].to_numpy()})
    truth = {"u": pd.Series(u, index=ids), "x": x, "years": yrs, "ids": ids}
    return target, x.ravel(), traits, counties, truth


def true_model(fitted, truth):
    """The generator's own rule as a TraitModel on the fitted model's rows."""
    return replace(fitted, traits=("irrigated_share", "soil_whc_mm"), b0=B0, b1=B1,
                   gamma=np.array([G_IRR, 0.0]), delta=np.array([D_IRR, 0.0]), x_center=0.0,
                   trait_mean=np.array([REF_IRR, 0.0]), trait_sd=np.array([1.0, 1.0]),
                   county_effect=truth["u"].rename_axis("county_id"))


def make_cube(truth, *, index="spei", scale=4):
    """An IndexCube whose value in every week of year t is the world's x[t, c]."""
    from impactlink.indices.cube import IndexCube

    yrs = truth["years"]
    weeks = pd.date_range(f"{yrs[0] - 1}-12-28", f"{yrs[-1]}-12-31", freq="7D")
    iso_year = weeks.isocalendar().year.to_numpy()
    arr = np.full((len(weeks), len(truth["ids"])), np.nan)
    pos = np.searchsorted(yrs, iso_year)
    inside = (iso_year >= yrs[0]) & (iso_year <= yrs[-1])
    arr[inside] = truth["x"][pos[inside]]
    return IndexCube(weeks=weeks, county_ids=tuple(truth["ids"]), arrays={(index, scale): arr})
