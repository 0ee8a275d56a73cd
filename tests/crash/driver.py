"""Child of the kill harness: ``driver.py table SPEC OUT [--workers N]`` or ``driver.py bake CFG OUT``.

Imports matgen, prints READY, runs the job, prints DONE. Exit 2 with one line on a MatgenError.
"""

import sys
import warnings


def main(argv):
    warnings.simplefilter("ignore")
    kind, src, out = argv[0], argv[1], argv[2]
    workers = int(argv[argv.index("--workers") + 1]) if "--workers" in argv else None
    from matgen.errors import MatgenError

    if kind == "table":
        from matgen.tables.build import build_table

        def job():
            build_table(
                src, out, executor="serial" if workers is None else "local", workers=workers, progress=False
            )
    elif kind == "bake":
        from matgen.bake.config import load_config
        from matgen.export.job import bake

        def job():
            bake(load_config(src), out, jobs=1)
    else:
        raise SystemExit(f"unknown job kind {kind}")
    print("READY", flush=True)
    try:
        job()
    except MatgenError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    print("DONE", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
