"""Make the harness modules importable (pytest runs in importlib mode): this folder and tests/hostile."""

import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
for p in (HERE, HERE.parent / "hostile"):
    if str(p) not in sys.path:
        sys.path.insert(0, str(p))
