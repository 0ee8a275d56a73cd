"""`matgen bench transport`: every figure measured in the run, the interaction count exact, the reference
command timed and its Rd / Tt compared."""

import shutil
import subprocess
import sys

import numpy as np
import pytest
from transport_cases import benchmark_stack

from matgen.errors import ParameterError
from matgen.transport import bench as B
from matgen.transport import kernels_py as P
from matgen.transport import simulate as S


def test_interaction_count_matches_python_twin():
    """The counting pass traces the same histories as the kernel: the twin counts the same spins."""
    stack = benchmark_stack(800)
    lay = S.layer_table(stack)
    _, w0, ux0, uz0 = S.launch(stack, 1.0)
    layers = [
        dict(z_top=r[0], z_bot=r[1], n=r[2], n_up=r[3], n_down=r[4], mu_a=r[5], mu_s=r[6], g=r[7])
        for r in lay.tolist()
    ]
    twin = sum(P.trace(P.PhotonStream(5, i), layers, w0, ux0, uz0)[-1] for i in range(40))
    assert B.interactions(stack, 40, 5) == twin
    assert twin > 40  # photons scatter many times in this stack


def test_no_stored_throughput_constants():
    """Ratios come from measurements of the same run: the module holds no reference photons/s figures."""
    numeric = [n for n, v in vars(B).items() if n.isupper() and isinstance(v, (int, float, dict))]
    assert numeric == ["SLAB_PHOTON_FACTOR"], numeric


def test_layers_file_round_trips_the_stack(tmp_path):
    stack = benchmark_stack(550)
    path = tmp_path / "s.layers"
    B.write_layers_file(stack, path)
    rows = [list(map(float, line.split())) for line in path.read_text().splitlines()]
    assert rows[0] == [stack.n_above, stack.n_below]
    arr = np.array(rows[1:])
    for col, field in enumerate(("thickness_mm", "n", "mu_a", "mu_s", "g")):
        assert np.array_equal(arr[:, col], getattr(stack, field)), field


def _fake_reference(tmp_path, body):
    script = tmp_path / "ref.py"
    script.write_text(body)
    return f"{sys.executable} {script} {{layers}} {{photons}} {{seed}}"


def test_reference_command_is_timed_and_compared(tmp_path):
    cmd = _fake_reference(
        tmp_path,
        "import sys\nopen(sys.argv[1]).read()\nprint('Rd 0.25 0.001')\nprint('Tt 0.5 0.002')\n",
    )
    stack = benchmark_stack(550)
    row = B.measure_configuration("550 nm", stack, 300, 1, 2, [1], reference=cmd, tmp=tmp_path)
    assert row["interactions"] == B.interactions(stack, 300, 1)
    assert row["reference_Rd"] == (0.25, 0.001)
    rd = row["matgen_Rd"]
    assert row["z_Rd"] == pytest.approx((rd[0] - 0.25) / np.hypot(rd[1], 0.001))
    assert row["ratio_to_reference_1t"] > 0
    lo, hi = row["ratio_to_reference_rounds"]
    assert lo <= hi
    assert 0 < row["fraction_of_ceiling_1t"]


def test_failing_reference_command_is_one_matgen_error(tmp_path):
    cmd = _fake_reference(tmp_path, "import sys\nprint('broken', file=sys.stderr)\nsys.exit(3)\n")
    with pytest.raises(ParameterError, match="status 3: broken"):
        B.run_reference(cmd, tmp_path / "x", 10, 1)
    with pytest.raises(ParameterError, match="placeholder"):
        B.run_reference("prog {nothing}", tmp_path / "x", 10, 1)


@pytest.mark.skipif(shutil.which("gcc") is None, reason="needs gcc to build tools/bench/layered_mc.c")
def test_c_reference_agrees_with_van_de_hulst(tmp_path):
    """The C reference of tools/bench reproduces the matched slab (van de Hulst 1980, as quoted by Wang,
    Jacques & Zheng 1995: Rd 0.09739, Tt 0.66096) within 3 of its own standard errors."""
    exe = tmp_path / "layered_mc"
    src = B.Path(__file__).resolve().parents[2] / "tools" / "bench" / "layered_mc.c"
    subprocess.run(["gcc", "-O2", "-o", str(exe), str(src), "-lm"], check=True)
    B.write_layers_file(B.benchmark_stacks()["matched slab"], tmp_path / "slab.layers")
    cmd = f"{exe} {{layers}} {{photons}} {{seed}}"
    _, cpu, est = B.run_reference(cmd, tmp_path / "slab.layers", 200_000, 3)
    assert cpu > 0  # the child's CPU time is accounted
    for key, ref in (("Rd", 0.09739), ("Tt", 0.66096)):
        value, stderr = est[key]
        assert abs(value - ref) <= 3 * stderr, (key, value, stderr)
