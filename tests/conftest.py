"""Shared fixtures: the reference data sets folder and the real-Redis switch."""

from __future__ import annotations

import os
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DATASETS = Path(os.environ.get("BOUNDWISE_DATASETS", ROOT.parent / "shared" / "datasets")).resolve()


@pytest.fixture(scope="session")
def datasets() -> Path:
    """Return the reference data sets folder (env BOUNDWISE_DATASETS, default ../shared/datasets)."""
    if not DATASETS.is_dir():
        if os.environ.get("BOUNDWISE_REQUIRE_DATASETS"):
            pytest.fail(f"reference data sets not found at {DATASETS}; CI must have them")
        pytest.skip(f"reference data sets not found at {DATASETS} (set BOUNDWISE_DATASETS)")
    return DATASETS
