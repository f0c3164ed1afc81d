"""Test-suite set-up: the tests' own helper modules (tests/helpers_*.py) are importable by name."""

import sys
from pathlib import Path

# pytest's importlib mode does not put the tests' folder on sys.path
sys.path.insert(0, str(Path(__file__).parent))


import pytest  # noqa: E402


@pytest.fixture(scope="session")
def band_capture(tmp_path_factory):
    """The band tests' 10 s, four-station capture (tests/helpers_band.py), made once per session."""
    from helpers_band import make_band_capture

    return make_band_capture(tmp_path_factory.mktemp("band-capture"))
