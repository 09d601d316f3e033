"""The committed scenario files are exactly what the generator writes for the default seed."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pandas as pd
import pyarrow.parquet as pq
import pytest

from impactlink.scenario import DEFAULT_SEED, SCENARIO_FILES, generate

COMMITTED = Path(__file__).resolve().parents[2] / "scenario_data"
#: Files in scenario_data/ that the generator does not write.
NOT_GENERATED = {"README.md", "impactlink.toml", "trigger_plan.toml"}
MAX_BYTES = 25 * 1024 * 1024


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture(scope="module")
def regenerated(tmp_path_factory) -> dict[str, Path]:
    return generate(tmp_path_factory.mktemp("scenario"), seed=DEFAULT_SEED)


def test_generate_returns_every_contract_file(regenerated):
    assert list(regenerated) == list(SCENARIO_FILES)
    assert all(p.is_file() for p in regenerated.values())


def test_committed_folder_holds_exactly_the_generated_files():
    present = {p.name for p in COMMITTED.iterdir() if p.is_file()}
    assert present - NOT_GENERATED == set(SCENARIO_FILES)


@pytest.mark.parametrize("name", SCENARIO_FILES)
def test_committed_file_matches_generator(regenerated, name):
    new, old = regenerated[name], COMMITTED / name
    if _sha256(new) == _sha256(old):
        return
    if name.endswith(".parquet"):
        # Parquet files record the writer version ("created_by") in their footer; a
        # different pyarrow version changes the bytes but not the data. Only in that case
        # fall back to comparing the tables value by value.
        new_by = pq.ParquetFile(new).metadata.created_by
        old_by = pq.ParquetFile(old).metadata.created_by
        if new_by != old_by:
            pd.testing.assert_frame_equal(pd.read_parquet(new), pd.read_parquet(old))
            return
    pytest.fail(f"{name}: regenerated file differs from scenario_data/{name}; run "
                "`impactlink scenario --seed 20261202 --out scenario_data` and commit")


def test_scenario_folder_is_small():
    total = sum(p.stat().st_size for p in COMMITTED.iterdir() if p.is_file())
    assert total < MAX_BYTES


def test_same_seed_same_bytes_other_seed_other_weather(regenerated, tmp_path):
    other = generate(tmp_path / "other", seed=7)
    assert _sha256(other["climate.parquet"]) != _sha256(regenerated["climate.parquet"])
    again = generate(tmp_path / "again", seed=7)
    for name in SCENARIO_FILES:
        assert _sha256(again[name]) == _sha256(other[name]), name


def test_generate_rejects_bad_seed(tmp_path):
    with pytest.raises(ValueError, match="seed must be a non-negative integer; got -1"):
        generate(tmp_path, seed=-1)
    with pytest.raises(ValueError, match="seed must be a non-negative integer"):
        generate(tmp_path, seed=1.5)


def test_generate_rejects_file_as_out_dir(tmp_path):
    f = tmp_path / "a_file.txt"
    f.write_text("x")
    with pytest.raises(ValueError, match="exists and is not a folder"):
        generate(f)


def test_progress_callback_receives_messages(tmp_path):
    messages: list[str] = []
    generate(tmp_path, seed=3, progress=messages.append)
    assert messages[0].startswith("drawing the map")
    assert any("writing files" in m for m in messages)
