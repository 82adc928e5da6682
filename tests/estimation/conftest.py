"""The NIST StRD reference folder kept in the repository (tests/data/nist_strd)."""

from pathlib import Path

import pytest

from .nist_strd import NIST_FOLDER


@pytest.fixture(scope="session")
def nist_folder() -> Path:
    return NIST_FOLDER
