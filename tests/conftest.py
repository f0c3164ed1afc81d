"""Test-suite set-up: the tests' own helper modules (tests/helpers_*.py) are importable by name."""

import sys
from pathlib import Path

# pytest's importlib mode does not put the tests' folder on sys.path
sys.path.insert(0, str(Path(__file__).parent))
