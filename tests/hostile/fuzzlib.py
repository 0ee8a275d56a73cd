"""Fuzz harness shared by the hostile-input tests and ``tools/hostile_report``.

A *target* is one parser or entry point of matgen fed with bytes (a file's content, or text). Its contract:
every input ends in either a valid result or one :class:`~matgen.errors.MatgenError` with a non-empty message;
never another exception type, never a hang (a per-case time budget), never a partial output (no temporary
file and, after an error, no new output file in the target's output folder).

Inputs come from a seed corpus per target (valid files made by matgen itself) put through a byte mutator
(flip, overwrite with boundary values, insert, delete, duplicate, truncate, splice). The mutator is driven by
:mod:`hypothesis` in the tests (``byte_mutations()`` strategy) and by a seeded :class:`random.Random` in the
report script; when the ``atheris`` package is installed, the report also drives each target with libFuzzer.
"""

from __future__ import annotations

import contextlib
import importlib
import random
import shutil
import signal
import struct
import tempfile
import time
import traceback
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from matgen.errors import MatgenError

#: Values a mutator writes over bytes: boundaries of integer widths and IEEE floats (NaN, inf, huge).
INTERESTING = [
    b"\x00",
    b"\xff",
    b"\x7f",
    b"\x80",
    b"\x00\x00\x00\x00",
    b"\xff\xff\xff\xff",
    b"\x7f\xff\xff\xff",
    b"\x00\x00\x00\x80",
    struct.pack("<d", float("nan")),
    struct.pack("<d", float("inf")),
    struct.pack("<f", float("nan")),
    struct.pack("<f", -float("inf")),
    struct.pack("<q", 2**62),
    b"nan",
    b"inf",
    b"-1",
    b"1e308",
    b"0",
    b"..",
    b"/",
    b"\\",
    b'"',
    b"'",
    b"[",
    b"]",
    b"{",
    b"}",
    b"=",
    b",",
    b"\n",
    b"\r\n",
    b"\t",
    b"\xc3\x28",
    b"9" * 40,
    b"../../etc/passwd",
]


class Failure(AssertionError):
    """A target broke its contract on one input."""

    def __init__(self, target: str, kind: str, data: bytes, detail: str):
        self.target, self.kind, self.data, self.detail = target, kind, data, detail
        super().__init__(
            f"{target}: {kind} on input {data[:200]!r}{'...' if len(data) > 200 else ''} "
            f"({len(data)} bytes)\n{detail}"
        )


@dataclass
class Target:
    """One parser or entry point under test.

    Attributes
    ----------
    name : str
        Target name in reports.
    seeds : callable(Path) -> list[bytes]
        Makes the seed corpus (valid inputs) in a scratch folder.
    run : callable(bytes, Path) -> object
        Feeds one input; the Path is a fresh scratch folder the input may be written into.
        Output files, if any, go to ``<scratch>/out``.
    requires : tuple of str
        Modules that must import for the target to exist (the stage may not be built yet).
    time_budget_s : float
        Per-case wall-clock budget; a case running longer is a hang.
    """

    name: str
    seeds: Callable[[Path], list]
    run: Callable[[bytes, Path], object]
    requires: tuple = ()
    time_budget_s: float = 10.0
    notes: str = ""
    _seed_cache: list = field(default_factory=list, repr=False)
    _warm: bool = field(default=False, repr=False)

    def warm_up(self) -> None:
        """Run each seed once without a time budget, so kernel compilation and first imports are not hangs."""
        if self._warm:
            return
        self._warm = True
        for seed in self.seed_corpus():
            with tempfile.TemporaryDirectory(prefix="matgen-warm-") as d:
                try:
                    self.run(seed, Path(d))
                except Exception:  # noqa: BLE001 - judged later, with the budget, by run_case
                    pass

    def available(self) -> tuple[bool, str]:
        """Whether the modules the target needs import, and why not."""
        for mod in self.requires:
            try:
                importlib.import_module(mod)
            except ImportError as exc:
                return False, f"{mod} not importable ({exc})"
            except (
                Exception
            ) as exc:  # a stage that fails to import is itself a finding, reported by the caller
                return False, f"{mod} fails to import: {type(exc).__name__}: {exc}"
        return True, ""

    def seed_corpus(self) -> list[bytes]:
        """Seed inputs, made once per process."""
        if not self._seed_cache:
            with tempfile.TemporaryDirectory(prefix="matgen-seed-") as d:
                self._seed_cache.extend(bytes(s) for s in self.seeds(Path(d)))
        return self._seed_cache


class _Timeout(BaseException):
    pass


@contextlib.contextmanager
def _alarm(seconds: float):
    def handler(signum, frame):
        raise _Timeout()

    old = signal.signal(signal.SIGALRM, handler)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)


def _listing(folder: Path) -> set[str]:
    if not folder.exists():
        return set()
    return {str(p.relative_to(folder)) for p in folder.rglob("*")}


def run_case(target: Target, data: bytes, scratch: Path | None = None) -> str:
    """Feed ``data`` to ``target`` and check the contract.

    Returns
    -------
    str
        ``"valid"`` (a result came back) or ``"rejected"`` (one MatgenError).

    Raises
    ------
    Failure
        Another exception type, an empty message, a hang, or a partial output.
    """
    target.warm_up()
    own = scratch is None
    scratch = Path(tempfile.mkdtemp(prefix="matgen-fuzz-")) if own else Path(scratch)
    try:
        out = scratch / "out"
        before = _listing(out)
        outcome = "valid"
        try:
            with _alarm(target.time_budget_s):
                target.run(bytes(data), scratch)
        except _Timeout:
            raise Failure(target.name, f"hang (> {target.time_budget_s} s)", data, "") from None
        except MatgenError as exc:
            if not str(exc).strip():
                raise Failure(target.name, f"{type(exc).__name__} with an empty message", data, "") from None
            outcome = "rejected"
        except Exception as exc:
            raise Failure(
                target.name, f"{type(exc).__name__}: {exc}"[:300], data, traceback.format_exc(limit=-6)
            ) from None
        leftovers = [p for p in _listing(scratch) if ".tmp" in Path(p).name]
        if leftovers:
            raise Failure(target.name, "temporary file left behind", data, ", ".join(sorted(leftovers)))
        if outcome == "rejected":
            new = _listing(out) - before
            if new:
                raise Failure(
                    target.name,
                    "output written although the input was rejected",
                    data,
                    ", ".join(sorted(new)),
                )
        return outcome
    finally:
        if own:
            shutil.rmtree(scratch, ignore_errors=True)


# ---------------------------------------------------------------------------------------------------------
# byte mutator


def mutate(data: bytes, ops: list[tuple]) -> bytes:
    """Apply mutation operations (as drawn by :func:`random_ops` or :func:`byte_mutations`) to ``data``.

    Each op is a tuple ``(kind, position_fraction, a, b)`` with ``position_fraction`` in [0, 1) so that ops
    stay meaningful for any input length.
    """
    buf = bytearray(data)
    for kind, frac, a, b in ops:
        pos = int(frac * len(buf)) if buf else 0
        if kind == "flip" and buf:
            buf[pos] ^= 1 << (a % 8)
        elif kind == "byte" and buf:
            buf[pos] = a % 256
        elif kind == "interesting":
            val = INTERESTING[a % len(INTERESTING)]
            buf[pos : pos + len(val)] = val
        elif kind == "insert":
            val = INTERESTING[a % len(INTERESTING)] * (1 + b % 4)
            buf[pos:pos] = val
        elif kind == "delete":
            del buf[pos : pos + 1 + b % 64]
        elif kind == "duplicate":
            chunk = buf[pos : pos + 1 + b % 256]
            buf[pos:pos] = chunk * (1 + a % 3)
        elif kind == "truncate":
            del buf[pos:]
        elif kind == "digit":
            # replace a run of ASCII digits with another number (size fields in text formats)
            i = pos
            while i < len(buf) and not chr(buf[i]).isdigit():
                i += 1
            j = i
            while j < len(buf) and chr(buf[j]).isdigit():
                j += 1
            if i < len(buf):
                choices = [b"0", b"-1", b"1", b"99999999999", b"1e400", b"nan", str(a).encode()]
                buf[i:j] = choices[b % len(choices)]
    return bytes(buf)


OP_KINDS = ("flip", "byte", "interesting", "insert", "delete", "duplicate", "truncate", "digit")


def random_ops(rng: random.Random, max_ops: int = 6) -> list[tuple]:
    """Draw mutation ops from a seeded generator (for the report's fixed-budget runs)."""
    n = rng.randint(1, max_ops)
    return [
        (rng.choice(OP_KINDS), rng.random(), rng.randrange(1 << 16), rng.randrange(1 << 16)) for _ in range(n)
    ]


def byte_mutations(max_ops: int = 6):
    """A hypothesis strategy of mutation op lists (shrinks toward fewer, simpler ops)."""
    from hypothesis import strategies as st

    op = st.tuples(
        st.sampled_from(OP_KINDS),
        st.floats(0, 1, exclude_max=True),
        st.integers(0, 1 << 16),
        st.integers(0, 1 << 16),
    )
    return st.lists(op, min_size=1, max_size=max_ops)


@dataclass
class Tally:
    """Cases run per target and what became of them."""

    cases: int = 0
    valid: int = 0
    rejected: int = 0
    failures: list = field(default_factory=list)
    seconds: float = 0.0


def fuzz(target: Target, cases: int, seed: int = 0, stop_after_failures: int = 5) -> Tally:
    """Run ``cases`` mutated inputs (seeds first) through ``target`` with a seeded mutator."""
    rng = random.Random(seed)
    tally = Tally()
    seeds = target.seed_corpus()
    t0 = time.perf_counter()
    for i in range(cases):
        if i < len(seeds):
            data = seeds[i]
        else:
            base = rng.choice(seeds)
            if rng.random() < 0.1 and len(seeds) > 1:  # splice two seeds
                other = rng.choice(seeds)
                base = base[: rng.randrange(len(base) + 1)] + other[rng.randrange(len(other) + 1) :]
            data = mutate(base, random_ops(rng))
        tally.cases += 1
        try:
            outcome = run_case(target, data)
        except Failure as exc:
            tally.failures.append(exc)
            if len(tally.failures) >= stop_after_failures:
                break
            continue
        if outcome == "valid":
            tally.valid += 1
        else:
            tally.rejected += 1
    tally.seconds = time.perf_counter() - t0
    return tally
