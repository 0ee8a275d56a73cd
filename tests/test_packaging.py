"""The main job runs on what `pip install .` installs: every package `matgen demo` imports is a core
dependency in pyproject.toml or required by one (no test extra, no optional extra)."""

import json
import re
import subprocess
import sys
import tomllib
from importlib import metadata
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

_DEMO = """
import json, sys


class _Recorder:
    \"\"\"Meta-path hook noting every top-level package that matgen's own code imports.\"\"\"

    seen = set()

    def find_spec(self, name, path=None, target=None):
        frame = sys._getframe(1)
        while frame is not None and frame.f_globals.get("__name__", "").startswith(("importlib", "_frozen")):
            frame = frame.f_back
        if frame is not None and frame.f_globals.get("__name__", "").startswith("matgen"):
            self.seen.add(name.split(".")[0])
        return None


sys.meta_path.insert(0, _Recorder())
from matgen.cli import main

rc = main(["demo", "--out", sys.argv[1], "--size", "32"])
print(json.dumps({"rc": rc, "modules": sorted(_Recorder.seen)}))
"""


def _name(requirement: str) -> str:
    return re.split(r"[\s<>=!~;\[(]", requirement, maxsplit=1)[0].lower().replace("_", "-")


def _installed_closure(names) -> set:
    """Distributions required by ``names``, transitively (only what is installed; extras are ignored)."""
    seen, todo = set(), list(names)
    while todo:
        name = todo.pop()
        if name in seen:
            continue
        seen.add(name)
        try:
            reqs = metadata.requires(name) or []
        except metadata.PackageNotFoundError:
            continue
        todo += [_name(r) for r in reqs if "extra ==" not in r]
    return seen


def test_demo_imports_only_core_dependencies(tmp_path):
    core = [_name(r) for r in tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["dependencies"]]
    allowed = _installed_closure(core)
    proc = subprocess.run(
        [sys.executable, "-c", _DEMO, str(tmp_path / "demo")], capture_output=True, text=True, cwd=ROOT
    )
    assert proc.returncode == 0, proc.stderr[-2000:]
    doc = json.loads(proc.stdout.strip().splitlines()[-1])
    assert doc["rc"] == 0
    owners = metadata.packages_distributions()
    used = {d.lower().replace("_", "-") for m in doc["modules"] for d in owners.get(m, []) if m != "matgen"}
    used -= {"matgen"}
    missing = sorted(used - allowed)
    assert not missing, f"matgen demo imports packages that pip install . does not bring: {missing}"
