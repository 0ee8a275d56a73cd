"""Make the harness modules importable (pytest runs in importlib mode): tests/hostile and tests/crash."""

import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
for p in (HERE.parent / "hostile", HERE.parent / "crash"):
    if str(p) not in sys.path:
        sys.path.insert(0, str(p))
