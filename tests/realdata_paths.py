"""Where the shared real open data live for tests (never copied into the repository).

CI lays the data out beside the checkout, so the folder is ``../shared/realdata`` relative to
the repository root. ``IMPACTLINK_REALDATA`` points elsewhere for a local run (for example a
worktree that does not sit beside the shared folder). Tests skip, with the reason, when the
folder is absent.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest

REPO_ROOT = Path(__file__).resolve().parents[1]


def realdata_dir() -> Path:
    """The real-data folder, or skip the calling test with the reason."""
    root = Path(os.environ.get("IMPACTLINK_REALDATA", REPO_ROOT.parent / "shared" / "realdata"))
    if not (root / "iowa").is_dir():
        pytest.skip(f"real data not found at {root} (CI puts it at ../shared/realdata beside the "
                    "checkout; set IMPACTLINK_REALDATA to run these tests elsewhere)")
    return root
