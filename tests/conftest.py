import os
from pathlib import Path

import matplotlib
import pytest

matplotlib.use("Agg")

PROJECT_ROOT = Path(__file__).resolve().parents[1]
REFERENCE_DIR = PROJECT_ROOT.parent / "shared" / "reference"


@pytest.fixture(scope="session")
def reference_dir() -> Path:
    """Real published data in ../shared/reference (skip cleanly where absent)."""
    if not REFERENCE_DIR.is_dir():
        pytest.skip(f"reference data folder {REFERENCE_DIR} is absent")
    return REFERENCE_DIR


@pytest.fixture(scope="session")
def project_root() -> Path:
    return PROJECT_ROOT
