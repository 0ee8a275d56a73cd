"""Hostile inputs to every parser: each ends in a valid result or one MatgenError, no hang, no partial output.

Seed corpora are valid inputs written by matgen itself; hypothesis drives a byte mutator over them
(flip, boundary values, insert, delete, duplicate, truncate, splice; see fuzzlib.mutate). The full fuzz budget
runs in tools/hostile_report; here each target gets a small fixed budget so the suite stays fast.
Cases run per target are recorded in the JSON file named by MATGEN_HOSTILE_STATS (if set).
"""

import json
import os

import pytest
from fuzzlib import Failure, byte_mutations, mutate, run_case
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from targets import TARGETS, known_open

CASES = {}


def _record(name, outcome):
    CASES.setdefault(name, {"cases": 0, "valid": 0, "rejected": 0, "known_open": 0})
    CASES[name]["cases"] += 1
    CASES[name][outcome] += 1


def teardown_module(module):
    path = os.environ.get("MATGEN_HOSTILE_STATS")
    if path and CASES:
        with open(path, "w") as fh:
            json.dump(CASES, fh, indent=1, sort_keys=True)


def _judge(t, case):
    """Run one case; a failure matching an open finding (targets.KNOWN_OPEN) is counted, any other fails."""
    try:
        _record(t.name, run_case(t, case))
    except Failure as exc:
        if known_open(exc) is None:
            raise
        _record(t.name, "known_open")


def _available(name):
    ok, why = TARGETS[name].available()
    if not ok:
        pytest.skip(f"target {name} unavailable: {why}")
    return TARGETS[name]


@pytest.mark.parametrize("name", sorted(TARGETS))
def test_seed_corpus_is_accepted(name):
    """Every seed is a valid input: otherwise the mutated cases test nothing but the error path."""
    t = _available(name)
    seeds = t.seed_corpus()
    assert seeds
    outcomes = [run_case(t, s) for s in seeds]
    for o in outcomes:
        _record(name, o)
    assert "valid" in outcomes, f"no seed of {name} is accepted: {outcomes}"


# targets that run a whole bake per case get a smaller budget here (the report runs more)
SLOW = sorted(n for n, t in TARGETS.items() if t.time_budget_s >= 30)
FAST = sorted(n for n in TARGETS if n not in SLOW)


def _mutated(name, data):
    t = _available(name)
    seed = data.draw(st.sampled_from(t.seed_corpus()), label="seed")
    ops = data.draw(byte_mutations(), label="ops")
    _judge(t, mutate(seed, ops))


@pytest.mark.parametrize("name", FAST)
@settings(
    max_examples=40,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow],
    derandomize=True,
    database=None,
)
@given(data=st.data())
def test_mutated_inputs_keep_the_contract(name, data):
    _mutated(name, data)


@pytest.mark.parametrize("name", SLOW)
@settings(
    max_examples=20,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow],
    derandomize=True,
    database=None,
)
@given(data=st.data())
def test_mutated_inputs_keep_the_contract_slow(name, data):
    _mutated(name, data)


@pytest.mark.parametrize("name", sorted(TARGETS))
@settings(max_examples=10, deadline=None, derandomize=True, database=None)
@given(case=st.binary(max_size=512))
def test_random_bytes_keep_the_contract(name, case):
    _judge(_available(name), case)


def test_harness_detects_a_broken_target(tmp_path):
    """The harness itself can fail: a target raising a plain ValueError, hanging, or leaving a temp file."""
    from fuzzlib import Target

    def raises(data, scratch):
        raise ValueError("not a MatgenError")

    def hangs(data, scratch):
        import time

        time.sleep(5)

    def leaves_tmp(data, scratch):
        (scratch / "out").mkdir()
        (scratch / "out" / ".x.tmp.exr").write_bytes(b"partial")

    with pytest.raises(Failure, match="ValueError"):
        run_case(Target("t", lambda d: [b""], raises), b"x")
    sleeper = Target("t", lambda d: [b""], hangs, time_budget_s=0.2)
    sleeper._warm = True  # no unbudgeted warm-up run of a target that only sleeps
    with pytest.raises(Failure, match="hang"):
        run_case(sleeper, b"x")
    with pytest.raises(Failure, match="temporary"):
        run_case(Target("t", lambda d: [b""], leaves_tmp), b"x")
