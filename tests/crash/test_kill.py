"""Kill tests: SIGKILL at random points of a table build and of a bake, then check the outputs and a rerun.

After every kill each visible output file must be byte-identical to the same file of an uninterrupted run
(never partial, never corrupt); after the last kill a rerun must finish and give byte-identical outputs.
Kill delays are drawn from a seeded generator, uniformly over the measured duration of the uninterrupted
run (see killlib.py); the whole process group is killed, as when a farm node dies.
"""

import warnings
from pathlib import Path

import pytest
from killlib import digest_tree, kill_campaign, run_child

from matgen.tables.store import lut_files

TABLE_IGNORE = ("t.json", "t.job/tasks/*.json")  # wall times, host and PID: run-dependent by design


def _tiny_spec(tmp_path, photons=1500) -> Path:
    """lut/specs/tiny.toml with fewer photons and two bands (a kill test needs a real build, not accuracy)."""
    text = lut_files().joinpath("specs", "tiny.toml").read_text()
    for old, new in (
        ("photons_per_band = 4000", f"photons_per_band = {photons}"),
        ("centres_nm = [450.0, 550.0, 650.0]", "centres_nm = [450.0, 650.0]"),
    ):
        assert old in text, old
        text = text.replace(old, new)
    p = tmp_path / "spec.toml"
    p.write_text(text)
    return p


def _check(rep):
    assert rep.landed > 0, "no kill landed inside a run: the test tested nothing"
    assert not rep.partial_or_corrupt, "\n".join(rep.partial_or_corrupt)
    assert rep.rerun_identical, "rerun differs from the uninterrupted run: " + "; ".join(rep.differing_files)
    assert not rep.locks_after_rerun, f"stale locks not taken over by the rerun: {rep.locks_after_rerun}"


def test_kill_report_is_ok_only_when_a_kill_landed_inside_a_run():
    """A campaign whose runs all finished before their kills tested nothing: not ok, however clean."""
    from killlib import KillReport

    clean = dict(rerun_identical=True)
    assert not KillReport("job", kills=3, finished_before_kill=3, **clean).ok
    assert not KillReport("job", kills=0, **clean).ok
    assert KillReport("job", kills=3, finished_before_kill=2, **clean).ok
    assert not KillReport("job", kills=3, partial_or_corrupt=["t.npz"], **clean).ok
    assert not KillReport("job", kills=3, locks_after_rerun=["x.lock"], **clean).ok
    assert not KillReport("job", kills=3, rerun_identical=False).ok


def test_killed_table_build_leaves_no_partial_output_and_resumes_identically(tmp_path):
    pytest.importorskip("matgen.tables.build")
    spec = _tiny_spec(tmp_path)
    for name in ("warm", "ref"):
        (tmp_path / name).mkdir()
    # a first run compiles the kernels into numba's on-disk cache (seconds on a fresh checkout); only the
    # second, warm run is timed, so that kill delays drawn over its duration land inside the killed runs
    assert run_child(["table", spec, tmp_path / "warm" / "t.npz"]).finished
    ref = run_child(["table", spec, tmp_path / "ref" / "t.npz"])
    assert ref.finished, ref.stderr
    reference = {"run": digest_tree(tmp_path / "ref")}
    assert "t.npz" in reference["run"] and any(k.endswith(".npz") for k in reference["run"] if "tasks" in k)
    (tmp_path / "run").mkdir()
    from matgen.tables.build import build_table

    def rerun():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # stale locks of the killed runs are reported as warnings
            build_table(spec, tmp_path / "run" / "t.npz", executor="serial", progress=False)

    rep = kill_campaign(
        "table build (serial)",
        lambda: ["table", spec, tmp_path / "run" / "t.npz"],
        reference,
        ref.seconds,
        {"run": tmp_path / "run"},
        kills=2,
        seed=11,
        ignore=TABLE_IGNORE,
        rerun=rerun,
    )
    _check(rep)
    from matgen.tables.store import Table

    Table.load(tmp_path / "run" / "t.npz")  # checksum in the manifest verified


def test_killed_bake_leaves_no_partial_output_and_rerun_is_identical(tmp_path):
    pytest.importorskip("OpenImageIO")
    from projects import make_project

    cfg = make_project(tmp_path / "proj", h=96, w=96, tiles=[1001, 1002, 1011, 1012])
    assert run_child(["bake", cfg, tmp_path / "warm"]).finished  # fills numba's cache; see the table test
    ref = run_child(["bake", cfg, tmp_path / "ref"])
    assert ref.finished, ref.stderr
    reference = {"out": digest_tree(tmp_path / "ref")}
    assert "material.json" in reference["out"]
    from matgen.bake.config import load_config
    from matgen.export.job import bake

    def rerun():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            bake(load_config(cfg), tmp_path / "out", jobs=1)

    rep = kill_campaign(
        "bake (4 UDIM tiles)",
        lambda: ["bake", cfg, tmp_path / "out"],
        reference,
        ref.seconds,
        {"out": tmp_path / "out"},
        kills=4,
        seed=5,
        rerun=rerun,
    )
    _check(rep)
    from matgen.export.descriptor import inspect_descriptor

    assert inspect_descriptor(tmp_path / "out" / "material.json").ok
