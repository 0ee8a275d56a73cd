"""Imports run one way along the pipeline (DEVELOPERS.md, Layout); transport knows nothing of pigments."""

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1] / "matgen"

# rank of each stage: a module may import stages of equal or lower rank only.
RANK = {
    "spectra": 1,
    "tissue": 2,
    "transport": 2,
    "color": 3,
    "fit": 4,
    "tables": 5,
    "targets": 5,
    "bake": 6,
    "export": 7,
    "estimate": 7.5,
    "preview": 8,
    "lut": 5,
    "scenario": 8,
    "cli": 9,
}
# extra prohibitions beyond rank
FORBIDDEN = {
    "transport": {"spectra", "tissue", "color"},  # transport knows nothing of pigments or colour
    "tissue": {"transport"},
    "export": {"transport"},  # export knows nothing of Monte Carlo
}


def _stage(module_path: Path) -> str | None:
    rel = module_path.relative_to(ROOT)
    head = rel.parts[0]
    head = head[:-3] if head.endswith(".py") else head
    return head if head in RANK else None


def _imported_stages(tree: ast.AST):
    for node in ast.walk(tree):
        names = []
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names = [node.module]
        for name in names:
            parts = name.split(".")
            if parts[0] == "matgen" and len(parts) > 1 and parts[1] in RANK:
                yield parts[1], node.lineno


def test_imports_follow_pipeline_direction():
    problems = []
    for path in ROOT.rglob("*.py"):
        stage = _stage(path)
        if stage is None:
            continue
        tree = ast.parse(path.read_text(), filename=str(path))
        for target, line in _imported_stages(tree):
            if target == stage:
                continue
            if RANK[target] > RANK[stage] or target in FORBIDDEN.get(stage, set()):
                problems.append(f"{path.relative_to(ROOT.parent)}:{line} ({stage}) imports matgen.{target}")
    assert not problems, "imports against the pipeline direction:\n" + "\n".join(problems)
