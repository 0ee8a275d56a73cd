"""The export tests share the bake tests' test data (tests/bake/conftest.py: invented smooth test table)."""

import importlib.util
from pathlib import Path

_spec = importlib.util.spec_from_file_location(
    "_bake_testdata", Path(__file__).parents[1] / "bake" / "conftest.py"
)
_mod = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(_mod)

kit = _mod.kit
test_table = _mod.test_table
