"""Test-suite set-up.

- The tests' own helper modules (tests/helpers_*.py) are importable by name.
- Hypothesis runs derandomized by default (profile ``repeatable``): every run, in CI and on a
  developer's machine, tries the same examples, so a red run is reproduced by running it again.
  ``SDRX_HYPOTHESIS_PROFILE=explore`` searches with fresh random examples instead; a failure found
  that way prints the ``@reproduce_failure`` blob to paste into the test.
"""

import os
import sys
from pathlib import Path

from hypothesis import settings

# pytest's importlib mode does not put the tests' folder on sys.path
sys.path.insert(0, str(Path(__file__).parent))

settings.register_profile("repeatable", derandomize=True, deadline=None, print_blob=True, database=None)
settings.register_profile("explore", derandomize=False, deadline=None, print_blob=True)
settings.load_profile(os.environ.get("SDRX_HYPOTHESIS_PROFILE", "repeatable"))

import pytest  # noqa: E402  (after the profile is loaded)


@pytest.fixture(scope="session")
def band_capture(tmp_path_factory):
    """The band tests' 10 s, four-station capture (tests/helpers_band.py), made once per session."""
    from helpers_band import make_band_capture

    return make_band_capture(tmp_path_factory.mktemp("band-capture"))
