"""On the committed scenario the demo's look-alike pair is explained by the generator's trait.

scenario_data/README.md ("Planted drivers") and impactlink/scenario/_impacts.py: rainfed
maize yields respond to the 13-week water balance at ISO week 34 with a sensitivity scaled by
clip(150 / soil_whc_mm, 0.7, 1.6); no other trait enters rainfed yields. So the largest
sensitivity part of the chosen pair must be soil_whc_mm.
"""

import pytest

from impactlink.contrast import contrast_counties
from impactlink.report.words_contrast import contrast_paragraph


@pytest.mark.slow
@pytest.mark.parametrize("name", ["maize_shortfall:maize:rainfed",
                                  "maize_shortfall:maize:rainfed:shortfall_20pct"])
def test_scenario_pair_names_soil_water_holding_capacity(scenario_run, name):
    _out, result = scenario_run
    st = result.state
    target = next(t for t in st.link.targets if t.name == name)
    _model, best = st.rank.best[name]
    counties = st.inputs.bundle.tables["counties"].drop(columns="geometry")
    res = contrast_counties(target, st.indices.cube, best, st.inputs.bundle.tables["traits"],
                            counties,
                            n_boot=20, seed=1)
    s = res.summary.iloc[0]
    assert s["top_trait"] == "soil_whc_mm"
    part = res.traits_side.set_index("trait")["sensitivity_pts"]
    assert part.abs().idxmax() == "soil_whc_mm"
    assert abs(s["exposure_pts"] + s["sensitivity_pts"] + s["unexplained_pts"]
               - s["gap_pts"]) < 1e-10
    names = dict(zip(counties["county_id"].astype(str), counties["county_name"]))
    assert s["county_name_a"] == names[s["county_a"]]
    text = contrast_paragraph(s)
    assert s["county_name_a"] in text and f"({s['county_a']})" in text and " mm " in text
