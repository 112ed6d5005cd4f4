"""Shared test fixtures."""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from hypothesis import settings

# Property tests draw the same examples on every run, so a result never depends on luck; set
# HYPOTHESIS_PROFILE=explore to draw fresh ones.
settings.register_profile("repeatable", derandomize=True, print_blob=True)
settings.register_profile("explore", derandomize=False)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "repeatable"))

REPO = Path(__file__).resolve().parents[1]


def find_real_clips() -> Path | None:
    """The folder of real recorded clips, or None: $RETARGET_REAL_CLIPS, then ../shared/real_clips next
    to the checkout, then /work/shared/real_clips. The clips are never copied into the project."""
    candidates = [os.environ.get("RETARGET_REAL_CLIPS"), REPO.parent / "shared" / "real_clips",
                  Path("/work/shared/real_clips")]
    for c in candidates:
        if c and Path(c).is_dir() and any(Path(c).glob("*.bvh")):
            return Path(c)
    return None


@pytest.fixture(scope="session")
def real_clips() -> list[Path]:
    """Every real clip; skips the test when the folder is absent."""
    folder = find_real_clips()
    if folder is None:
        pytest.skip("real clips folder (../shared/real_clips) is absent")
    return sorted(folder.glob("*.bvh"))
