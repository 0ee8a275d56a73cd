"""libFuzzer (atheris) driver for one fuzz target: ``python atheris_driver.py TARGET [libFuzzer flags]``.

The target's seed corpus is written to a temporary folder that libFuzzer starts from; matgen's modules are
imported under atheris' coverage instrumentation. An input breaking the contract (see fuzzlib.run_case) that
is not a known open finding (targets.KNOWN_OPEN) stops the run with a crash report and exit status 1.
Used by tools/hostile_report when the atheris package is installed (pip install atheris).
"""

import sys
import tempfile
import warnings
from pathlib import Path

import atheris

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

with atheris.instrument_imports(include=["matgen"]):
    import importlib

    from fuzzlib import Failure, run_case
    from targets import TARGETS, known_open


def _numba_modules() -> list:
    """matgen modules holding numba kernels: bytecode instrumentation would break their compilation."""
    import matgen

    root = Path(matgen.__file__).resolve().parent
    out = []
    for path in root.rglob("*.py"):
        text = path.read_text(errors="replace")
        if "njit" in text or "@numba" in text or "numba.jit" in text:
            rel = path.relative_to(root.parent).with_suffix("")
            out.append(".".join(rel.parts))
    return sorted(out)


def main(argv):
    name, flags = argv[1], argv[2:]
    warnings.simplefilter("ignore")
    target = TARGETS[name]
    with atheris.instrument_imports(include=["matgen"], exclude=_numba_modules()):  # before any plain import
        for mod in target.requires:
            try:
                importlib.import_module(mod)
            except ImportError:
                pass
    ok, why = target.available()
    if not ok:
        print(f"target {name} unavailable: {why}", file=sys.stderr)
        return 3
    corpus = Path(tempfile.mkdtemp(prefix=f"matgen-corpus-{name}-"))
    for i, seed in enumerate(target.seed_corpus()):
        (corpus / f"seed{i}").write_bytes(seed)

    def one_input(data: bytes):
        try:
            run_case(target, data)
        except Failure as exc:
            if known_open(exc) is None:
                raise

    target.warm_up()  # kernels compile (or load from numba's cache) before libFuzzer takes over the process
    atheris.Setup([argv[0], *flags, str(corpus)], one_input)
    atheris.Fuzz()
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
