"""One reduced end-to-end run on the committed fictional scenario (shared fixture).

The run is shared by the pipeline tests and the report's browser test, so the whole suite
pays for it once.
"""

import tomllib
from pathlib import Path

import pytest

from impactlink.project import project_from_dict

SCENARIO = Path(__file__).resolve().parents[1] / "scenario_data"


def quick_scenario_project(out: Path):
    """The scenario's own project file with a reduced grid (3 scales, 2 lags, 20 replicates)."""
    raw = tomllib.loads((SCENARIO / "impactlink.toml").read_text())
    raw["project"]["output_dir"] = str(out)
    raw["indices"]["scales_weeks"] = [4, 13, 26]
    raw["link"]["lags_weeks"] = [0, 4]
    raw["skill"].update(n_boot=20, challenger=False, pairs=False)
    for lad in raw["audit"]:
        lad["n_boot"] = 20
    keep = ("restrictions", "maize_shortfall")
    raw["impacts"] = {k: v for k, v in raw["impacts"].items() if k in keep}
    raw["impacts"]["restrictions"]["horizon_weeks"] = [13]
    return project_from_dict(raw, base=SCENARIO, path=SCENARIO / "impactlink.toml")


@pytest.fixture(scope="session")
def scenario_run(tmp_path_factory):
    """(run folder, RunResult) of the reduced scenario run, built once per session."""
    from impactlink.pipeline import run_project

    out = tmp_path_factory.mktemp("scenario_run")
    result = run_project(quick_scenario_project(out), until="run", out=out, quiet=True)
    return out, result
