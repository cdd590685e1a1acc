"""Shared set-up of the test suite: the oracles module is importable from every test folder."""

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
