"""The compiled-backend fixture of the kernel tests."""

from __future__ import annotations

import os

import pytest

from worker.engine import kernels


@pytest.fixture
def compiled():
    """Return the kernels module when the compiled backend is in use; skip (or fail in CI) otherwise."""
    if not kernels.COMPILED:
        if os.environ.get("BOUNDWISE_REQUIRE_COMPILED") == "1":
            pytest.fail(f"the compiled kernels are required but not in use: {kernels.IMPORT_ERROR}")
        pytest.skip(f"compiled kernels not in use: {kernels.IMPORT_ERROR}")
    return kernels
