"""Safety ceilings of matgen.limits: defaults, environment overrides, function overrides, messages."""

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from matgen import limits
from matgen.errors import ConfigError, ImageError, LimitError, MatgenError, ParameterError


def test_defaults_are_documented_and_in_force(monkeypatch):
    for name, (default, env, _unit) in limits.DEFAULTS.items():
        monkeypatch.delenv(env, raising=False)
        assert limits.get_limit(name) == default
        assert env in limits.__doc__ and f"``{name}``" in limits.__doc__


def test_photon_ceiling_matches_constants():
    from matgen.constants import MAX_PHOTONS

    assert limits.DEFAULTS["photons"][0] == MAX_PHOTONS


def test_environment_variable_lowers_ceiling(monkeypatch):
    monkeypatch.setenv("MATGEN_MAX_IMAGE_PIXELS", "1000")
    assert limits.check_image_dims(10, 100, 3) == 1000
    with pytest.raises(LimitError) as exc:
        limits.check_image_dims(10, 101, 3, path="maps/melanin.1001.exr")
    msg = str(exc.value)
    assert "1010" in msg and "1000" in msg and "MATGEN_MAX_IMAGE_PIXELS" in msg and "melanin.1001.exr" in msg


@pytest.mark.parametrize("raw", ["ten", "-5", "0", "1.5", "nan"])
def test_bad_environment_value_is_config_error(monkeypatch, raw):
    monkeypatch.setenv("MATGEN_MAX_PHOTONS", raw)
    with pytest.raises(ConfigError, match="MATGEN_MAX_PHOTONS"):
        limits.check_photons(10)


def test_environment_accepts_underscores_and_exponent(monkeypatch):
    monkeypatch.setenv("MATGEN_MAX_PHOTONS", "1_000")
    assert limits.get_limit("photons") == 1000
    monkeypatch.setenv("MATGEN_MAX_PHOTONS", "1e6")
    assert limits.get_limit("photons") == 10**6


def test_override_beats_environment_and_is_restored(monkeypatch):
    monkeypatch.setenv("MATGEN_MAX_PHOTONS", "100")
    with limits.override(photons=10**6):
        assert limits.check_photons(10**6) == 10**6
        with pytest.raises(LimitError, match="set_limit"):
            limits.check_photons(10**6 + 1)
    assert limits.get_limit("photons") == 100
    limits.set_limit("photons", 5)
    try:
        assert limits.get_limit("photons") == 5
    finally:
        limits.set_limit("photons", None)
    assert limits.get_limit("photons") == 100


def test_unknown_limit_name_lists_known_ones():
    with pytest.raises(ParameterError, match="image_pixels"):
        limits.get_limit("pixels")
    with pytest.raises(ParameterError):
        with limits.override(pixels=3):
            pass


@pytest.mark.parametrize(
    "w,h,c,field",
    [
        (0, 10, 3, "width"),
        (10, -1, 3, "height"),
        (10, 10, 0, "channel"),
        (1.5, 10, 1, "width"),
        ("x", 1, 1, "width"),
        (True, 1, 1, "width"),
    ],
)
def test_zero_negative_or_non_integer_dims_are_image_errors(w, h, c, field):
    with pytest.raises(ImageError, match=field):
        limits.check_image_dims(w, h, c, path="a.exr")


def test_each_image_ceiling_is_checked():
    with pytest.raises(LimitError, match="MATGEN_MAX_IMAGE_SIDE"):
        limits.check_image_dims(70000, 1, 1)
    with pytest.raises(LimitError, match="MATGEN_MAX_IMAGE_PIXELS"):
        limits.check_image_dims(20000, 20000, 1)
    with pytest.raises(LimitError, match="MATGEN_MAX_IMAGE_CHANNELS"):
        limits.check_image_dims(4, 4, 100000)
    with pytest.raises(LimitError, match="MATGEN_MAX_IMAGE_BYTES"):
        limits.check_image_dims(16384, 16384, 71)


def test_huge_declared_sizes_do_not_overflow():
    # 2**62 x 2**62 would wrap in int64 arithmetic; the check uses Python integers.
    import numpy as np

    with pytest.raises(LimitError):
        limits.check_image_dims(np.int64(2**62), np.int64(2**62), 1)
    with pytest.raises(LimitError):
        limits.check_table_entries(2**80, "grid")


def test_table_and_udim_and_generic_counts():
    with limits.override(table_entries=100, udim_tiles=3):
        assert limits.check_table_entries(100, "grid") == 100
        with pytest.raises(LimitError, match="quantity 'albedo_multiple'"):
            limits.check_table_entries(101, "quantity 'albedo_multiple'")
        with pytest.raises(LimitError, match="MATGEN_MAX_UDIM_TILES"):
            limits.check_udim_tiles(4, "maps/melanin.<UDIM>.exr")
        with pytest.raises(LimitError):
            limits.check_count(101, "table_entries", "band count x grid")
    with pytest.raises(ParameterError):
        limits.check_photons(0)
    with pytest.raises(ParameterError):
        limits.check_photons(2.5)


def test_file_size_and_text_reading(tmp_path):
    p = tmp_path / "config.toml"
    p.write_bytes(b"a = 1\n" * 100)
    with limits.override(text_bytes=599):
        with pytest.raises(LimitError, match="config.toml"):
            limits.read_text_limited(p, "material config")
    assert limits.read_text_limited(p, "material config").startswith("a = 1")
    bad = tmp_path / "bad.toml"
    bad.write_bytes(b"\xff\xfe\x00")
    with pytest.raises(ConfigError, match="not UTF-8"):
        limits.read_text_limited(bad, "material config")
    with pytest.raises(ConfigError, match="cannot read"):
        limits.check_file_size(tmp_path / "missing.bin", "table")
    with pytest.raises(ConfigError, match="not a regular file"):
        limits.check_file_size(tmp_path, "table")
    with limits.override(file_bytes=10):
        with pytest.raises(LimitError, match="MATGEN_MAX_FILE_BYTES"):
            limits.check_file_size(p, "table")


@settings(max_examples=150, deadline=None)
@given(w=st.integers(-(2**70), 2**70), h=st.integers(-(2**70), 2**70), c=st.integers(-10, 2**40))
def test_check_image_dims_accepts_exactly_the_dims_within_every_ceiling(w, h, c):
    """Property: the check passes iff every dimension is positive and within every ceiling, else errs."""
    ok = (
        w >= 1
        and h >= 1
        and c >= 1
        and max(w, h) <= limits.get_limit("image_side")
        and w * h <= limits.get_limit("image_pixels")
        and c <= limits.get_limit("image_channels")
        and w * h * c * 4 <= limits.get_limit("image_bytes")
    )
    if ok:
        assert limits.check_image_dims(w, h, c) == w * h
    else:
        with pytest.raises(MatgenError):
            limits.check_image_dims(w, h, c)


def test_reading_a_small_text_file_does_not_reserve_the_ceiling(tmp_path):
    """read(ceiling + 1) once reserved 64 MiB per config read; reading allocates in proportion to the file."""
    import tracemalloc

    p = tmp_path / "small.toml"
    p.write_text("a = 1\n")
    tracemalloc.start()
    try:
        limits.read_text_limited(p, "config")
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 4 << 20, f"{peak} bytes allocated to read a 6-byte file"


def test_text_file_grown_past_the_ceiling_is_refused(tmp_path):
    p = tmp_path / "big.toml"
    p.write_bytes(b"#" * (3 << 20))
    with limits.override(text_bytes=(2 << 20) + 5):
        with pytest.raises(LimitError):
            limits.read_text_limited(p, "config")


# ---------------------------------------------------------------------------------------------------------
# photon records: 8 x layers + 17 bytes per photon, bounded by the records_bytes ceiling


def _five_layers():
    from matgen.transport.stack import Stack

    return Stack([0.1] * 5, [1.4] * 5, [0.5] * 5, [30.0] * 5, [0.8] * 5)


def test_records_run_above_the_records_ceiling_is_a_limit_error(monkeypatch):
    """1000 photons on 5 layers need 57000 bytes of records: refused under MATGEN_MAX_RECORDS_BYTES=50000."""
    from matgen.transport.simulate import simulate

    monkeypatch.setenv("MATGEN_MAX_RECORDS_BYTES", "50000")
    with pytest.raises(LimitError, match="MATGEN_MAX_RECORDS_BYTES") as exc:
        simulate(_five_layers(), 1000, seed=1, threads=1, records=True)
    assert "57000" in str(exc.value) and "50000" in str(exc.value)
    # the same run without records needs no record memory, and 877 photons (49989 bytes) fit
    simulate(_five_layers(), 1000, seed=1, threads=1)
    _, rec = simulate(_five_layers(), 877, seed=1, threads=1, records=True)
    assert rec.nbytes == 877 * 57


def test_records_of_a_large_run_are_refused_before_allocation():
    """10^9 photons (under the photon ceiling) with records on 5 layers need 57 GB: LimitError first."""
    import tracemalloc

    from matgen.transport.simulate import simulate

    assert 10**9 <= limits.get_limit("photons")
    tracemalloc.start()
    try:
        with pytest.raises(LimitError, match="records"):
            simulate(_five_layers(), 10**9, seed=1, threads=1, records=True)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 50e6, f"{peak / 1e6:.0f} MB allocated while refusing the records"


def test_records_concatenation_above_the_ceiling_is_a_limit_error():
    from matgen.transport.records import PhotonRecords
    from matgen.transport.simulate import simulate

    parts = [
        simulate(_five_layers(), 500, seed=1, threads=1, first_photon=i * 500, records=True)[1]
        for i in range(2)
    ]
    with limits.override(records_bytes=57 * 999):
        with pytest.raises(LimitError, match="concatenation"):
            PhotonRecords.concatenate(parts)
    assert PhotonRecords.concatenate(parts).photons == 1000


def test_records_file_declaring_more_than_the_ceiling_is_refused_before_reading(tmp_path):
    """A saved 1000-photon records file (57000 bytes of arrays) loads by default, is refused under 50000."""
    from matgen.transport.records import PhotonRecords
    from matgen.transport.simulate import simulate

    _, rec = simulate(_five_layers(), 1000, seed=1, threads=1, records=True)
    rec.save(tmp_path / "rec.npz")
    assert PhotonRecords.load(tmp_path / "rec.npz").photons == 1000
    with limits.override(records_bytes=50000):
        with pytest.raises(LimitError, match="rec.npz"):
            PhotonRecords.load(tmp_path / "rec.npz")


# ---------------------------------------------------------------------------------------------------------
# small text files of the table and lock machinery go through the size-limited reader too


def test_task_record_above_the_text_ceiling_is_corrupt(tmp_path):
    """A finished task's record padded past MATGEN_MAX_TEXT_BYTES is not read whole: the task is corrupt."""
    import shutil

    from targets_jobs import _built_job

    from matgen.tables.plan import JobFolder
    from matgen.tables.tasks import task_state

    shutil.copytree(_built_job(), tmp_path / "job")
    job = JobFolder.open(tmp_path / "job")
    assert task_state(job, 0).state == "done"
    rec = job.record_path(0)
    rec.write_text(rec.read_text() + " " * 5000)
    assert task_state(job, 0).state == "done"  # whitespace after the JSON is harmless within the ceiling
    with limits.override(text_bytes=4096):
        st = task_state(job, 0)
    assert st.state == "corrupt" and "MATGEN_MAX_TEXT_BYTES" in st.reason, st


def test_table_manifest_above_the_text_ceiling_is_limit_error(tmp_path):
    from targets import _small_table

    from matgen.tables.store import Table

    p = _small_table().save(tmp_path / "t.npz")
    side = tmp_path / "t.json"
    side.write_text(side.read_text() + " " * 20000)
    Table.load(p)
    with limits.override(text_bytes=10000):
        with pytest.raises(LimitError, match="t.json"):
            Table.load(p)


def test_lock_file_above_the_text_ceiling_is_not_taken_over(tmp_path):
    """A stale lock record (dead PID on this host) padded past the ceiling is not read: no takeover."""
    import json
    import socket
    import subprocess
    import sys
    import warnings

    from matgen.errors import LockError
    from matgen.fsutil import FolderLock, StaleLockWarning

    gone = subprocess.Popen([sys.executable, "-c", "pass"])
    gone.wait()
    record = json.dumps({"host": socket.gethostname(), "pid": gone.pid, "since": 0.0}) + " " * 5000
    (tmp_path / ".matgen.lock").write_text(record)
    with limits.override(text_bytes=4096):
        with pytest.raises(LockError, match="another process"):
            FolderLock(tmp_path).acquire()
    assert (tmp_path / ".matgen.lock").read_text() == record
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        with FolderLock(tmp_path):
            pass
    assert any(issubclass(w.category, StaleLockWarning) for w in caught)
