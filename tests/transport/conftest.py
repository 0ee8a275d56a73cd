"""Puts tests/reference (slow literal implementations and shared stacks) on sys.path for the transport tests."""

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "reference"))
