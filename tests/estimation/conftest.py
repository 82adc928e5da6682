"""Locate the NIST StRD reference folder (shared/ beside the repository, or $SPECIAKIN_SHARED)."""

from pathlib import Path

import pytest

from speciakin.estimation.nist_strd import find_nist_folder


@pytest.fixture(scope="session")
def nist_folder() -> Path:
    folder = find_nist_folder(Path(__file__))
    if folder is None:
        pytest.skip("NIST StRD folder not found: set SPECIAKIN_SHARED to the shared/ folder "
                    "(expected shared/reference/nist_strd beside the repository)")
    return folder
