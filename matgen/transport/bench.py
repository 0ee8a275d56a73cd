"""Transport benchmark: photons/s, interactions/s, ns per interaction and ratios measured in the same run.

Configurations: the standard five-layer benchmark stack at 550 and 800 nm and van de Hulst's matched slab
(:func:`benchmark_stacks`; mm, 1/mm). Every figure is measured in one run, nothing is a stored constant:

* **matgen**: photons per second of elapsed time with 1 and 2 threads, and per CPU second; the scattering
  events of the same photons are counted (a separate counting pass, not timed), giving interactions per
  second and nanoseconds per interaction (one interaction = one scattering event: hop, move, spin,
  roulette test).
* **ceiling**: a minimal step loop with the same per-interaction operations as the kernel (exponential draw
  of the hop, multiplication by 1/mu_s, move, path sum, depth test, Henyey-Greenstein polar draw,
  rejection azimuth, spin, roulette test) in an unbounded medium: no boundaries, no tallies, no per-photon
  set-up (:func:`step_ceiling`). ``of ceiling`` is its ns per step over matgen's ns per interaction on one
  thread; what is missing to 1 is boundary crossings (Fresnel, refraction, layer changes), launches and
  tallies.
* **reference** (optional, ``--reference-command CMD``): any external program timed by wall clock around
  its process, on one core, interleaved with the matgen runs (matgen, ceiling, reference, matgen, ...).
  ``CMD`` is a command line with the placeholders ``{layers}`` (a text file: first line ``n_above
  n_below``, then one line per layer from the top: ``thickness_mm n mu_a_per_mm mu_s_per_mm g``),
  ``{photons}`` and ``{seed}``. If it prints lines ``Rd <value> <stderr>`` and ``Tt <value> <stderr>``
  they are compared with matgen's (difference in combined standard errors). ``tools/bench/layered_mc.c``
  is such a program (the classic steps of Wang, Jacques & Zheng 1995).

Each configuration runs ``--repeats`` interleaved rounds; the best of each side is reported, and the spread
of the per-round ratios beside it. Ratios are formed from CPU time (of the one matgen thread, of the
ceiling loop, of the reference process as the operating system accounts it), which time-slicing on a
loaded machine does not inflate; the same ratios by elapsed time are printed beside them. The machine may be
shared: compare ratios measured side by side, not absolute figures.

Reweighting is timed last: the cost of one absorption set against a direct run of the same photons with
records, for ``--sets`` sets and for 2 sets (per-records preparation is cached).
"""

from __future__ import annotations

import math
import os
import re
import resource
import shlex
import subprocess
import tempfile
import time
from pathlib import Path

import numba
import numpy as np
from numba import njit, prange

from matgen.errors import ParameterError
from matgen.transport import kernels as K
from matgen.transport.phase import hg_constants, hg_sample_mu_with, spin
from matgen.transport.reweight import reweight
from matgen.transport.rng import exponential, photon_state, uniform
from matgen.transport.simulate import launch, layer_table, simulate
from matgen.transport.stack import Stack

EXAMPLE = (
    "matgen bench transport --photons 200000 "
    "--reference-command 'tools/bench/layered_mc {layers} {photons} {seed}'"
)

#: Photons of the matched slab per photon of the benchmark stack (its photons are about 40x cheaper).
SLAB_PHOTON_FACTOR = 20


def benchmark_stacks() -> dict[str, Stack]:
    """Return the standard benchmark stack at 550 and 800 nm and the matched slab (mm, 1/mm)."""
    d = [0.02, 0.10, 0.20, 1.80, 3.00]
    n = [1.55, 1.40, 1.40, 1.40, 1.44]
    names = ("stratum corneum", "epidermis", "papillary dermis", "reticular dermis", "hypodermis")
    return {
        "550 nm": Stack(
            d,
            n,
            [0.5, 1.5, 0.2, 0.1, 0.1],
            [40, 30, 20, 18, 12],
            [0.90, 0.80, 0.85, 0.85, 0.90],
            1.0,
            1.40,
            names,
        ),
        "800 nm": Stack(
            d,
            n,
            [0.2, 0.3, 0.03, 0.03, 0.03],
            [20, 15, 12, 11, 10],
            [0.90, 0.85, 0.90, 0.90, 0.90],
            1.0,
            1.40,
            names,
        ),
        "matched slab": Stack([0.2], [1.0], [1.0], [9.0], [0.75]),
    }


def add_arguments(parser) -> None:
    """Options of ``matgen bench transport``."""
    parser.add_argument(
        "--photons",
        type=int,
        default=200_000,
        help=f"photons per run on the benchmark stack (the matched slab runs {SLAB_PHOTON_FACTOR}x as many)",
    )
    parser.add_argument(
        "--sets", type=int, default=64, help="absorption sets for the reweighting measurement"
    )
    parser.add_argument(
        "--repeats", type=int, default=3, help="interleaved rounds per configuration (the best is reported)"
    )
    parser.add_argument("--seed", type=int, default=1, help="seed of every run")
    parser.add_argument(
        "--reference-command",
        metavar="CMD",
        help="external program timed side by side; placeholders {layers} {photons} {seed} (see above)",
    )


# --------------------------------------------------------------------------------------------- ceiling


@njit(cache=True, error_model="numpy")
def step_ceiling(seed, n_steps, mu_s, mu_a, g):
    """Minimal step loop with the kernel's per-interaction operations, in an unbounded medium.

    Parameters
    ----------
    seed : uint64
        Seed of the one stream used.
    n_steps : int
        Scattering events to simulate.
    mu_s, mu_a : float
        Scattering and absorption coefficients (1/mm); ``mu_a`` sets the roulette path bound, as in the
        kernel (the exponential is evaluated only when that bound is passed, which is rare).
    g : float
        Henyey-Greenstein anisotropy.

    Returns
    -------
    float
        A sum of the final state (keeps the loop from being optimised away; no meaning).

    """
    s0, s1 = photon_state(seed, np.uint64(0))
    x = 0.0
    y = 0.0
    z = 0.0
    ux = 0.0
    uy = 0.0
    uz = 1.0
    zmax = 0.0
    visit = 0.0
    half_depth = 1.0e300
    w = 1.0
    limit = (0.0 - K.LOG_ROULETTE_WEIGHT) / mu_a if mu_a > 0.0 else math.inf
    inv_mu_s = 1.0 / mu_s
    iso, hg1, hg2, hg3, hg4, hg5 = hg_constants(g)
    for _ in range(n_steps):
        tau, s0, s1 = exponential(s0, s1)
        if uz > 0.0:
            dist = half_depth - z
            auz = uz
        else:
            dist = z + half_depth
            auz = -uz
        if tau * auz < mu_s * dist:
            s = tau * inv_mu_s
            x += s * ux
            y += s * uy
            z += s * uz
            visit += s
            if z > zmax:
                zmax = z
        u, s0, s1 = uniform(s0, s1)
        mu = hg_sample_mu_with(iso, hg1, hg2, hg3, hg4, hg5, u)
        cos_phi, sin_phi, s0, s1 = K.sample_azimuth(s0, s1)
        ux, uy, uz = spin(ux, uy, uz, mu, cos_phi, sin_phi)
        if visit > limit:  # restart the weight as a fresh packet would (keeps the test live)
            w *= math.exp(-mu_a * visit)
            visit = 0.0
    return x + y + z + zmax + visit + w


@njit(cache=True, parallel=True, error_model="numpy")
def count_scatterings(lay, w0, ux0, uz0, seed, first_photon, n_photons, n_chunks):
    """Scattering events of photons ``first_photon ..`` (the same histories as :func:`K.run_tallies`)."""
    n_layers = lay.shape[0]
    log_w0 = math.log(w0)
    counts = np.zeros(n_chunks, dtype=np.int64)
    for c in prange(n_chunks):
        start = (n_photons * c) // n_chunks
        stop = (n_photons * (c + 1)) // n_chunks
        path = np.empty(n_layers)
        absorbed = np.empty(n_layers)
        wpath = np.empty(n_layers)
        total = 0
        for i in range(start, stop):
            s0, s1 = photon_state(seed, np.uint64(first_photon + i))
            res = K.trace_photon(s0, s1, lay, w0, log_w0, ux0, uz0, path, absorbed, wpath)
            total += res[6]
        counts[c] = total
    return counts.sum()


def interactions(stack: Stack, photons: int, seed: int) -> int:
    """Scattering events of the ``photons`` photons that ``simulate(stack, photons, seed)`` traces."""
    _, w0, ux0, uz0 = launch(stack, 1.0)
    chunks = max(1, min(photons, 16 * int(numba.config.NUMBA_NUM_THREADS)))
    with np.errstate(over="ignore"):
        return int(count_scatterings(layer_table(stack), w0, ux0, uz0, np.uint64(seed), 0, photons, chunks))


def ceiling_layer(stack: Stack) -> int:
    """Layer whose mu_s and g the ceiling loop uses: the one with the largest optical thickness."""
    return int(np.argmax(stack.thickness_mm * stack.mu_s))


def _time_ceiling(stack: Stack, steps: int, seed: int) -> tuple[float, float]:
    """Wall and CPU seconds of :func:`step_ceiling` for ``steps`` steps with the stack's ceiling layer."""
    j = ceiling_layer(stack)
    args = (np.uint64(seed), int(steps), float(stack.mu_s[j]), float(stack.mu_a[j]), float(stack.g[j]))
    with np.errstate(over="ignore"):  # only matters with NUMBA_DISABLE_JIT: uint64 wrap-around is intended
        c0 = time.process_time()
        t0 = time.perf_counter()
        step_ceiling(*args)
        return time.perf_counter() - t0, time.process_time() - c0


# ------------------------------------------------------------------------------------------- reference


def write_layers_file(stack: Stack, path) -> None:
    """Write ``stack`` in the reference command's text layout (module docstring); mm, 1/mm."""
    lines = [f"{stack.n_above!r} {stack.n_below!r}"]
    for j in range(stack.n_layers):
        lines.append(
            f"{float(stack.thickness_mm[j])!r} {float(stack.n[j])!r} {float(stack.mu_a[j])!r} "
            f"{float(stack.mu_s[j])!r} {float(stack.g[j])!r}"
        )
    Path(path).write_text("\n".join(lines) + "\n")


_ESTIMATE_LINE = re.compile(r"^\s*(Rd|Tt)\s+([-+0-9.eE]+)\s+([-+0-9.eE]+)\s*$", re.M)


def _children_cpu_s() -> float:
    ru = resource.getrusage(resource.RUSAGE_CHILDREN)
    return ru.ru_utime + ru.ru_stime


def run_reference(command: str, layers_path, photons: int, seed: int) -> tuple[float, float, dict]:
    """Run the reference command once; returns (wall s, CPU s of its process, {"Rd": (value, stderr)})."""
    try:
        argv = shlex.split(command.format(layers=shlex.quote(str(layers_path)), photons=photons, seed=seed))
    except (KeyError, IndexError, ValueError) as exc:
        raise ParameterError(
            f"--reference-command {command!r}: bad placeholder or quoting ({exc}); use {{layers}} "
            "{photons} {seed}"
        ) from None
    c0 = _children_cpu_s()
    t0 = time.perf_counter()
    try:
        env = {**os.environ, "OMP_NUM_THREADS": "1"}
        done = subprocess.run(argv, capture_output=True, text=True, env=env)
    except OSError as exc:
        raise ParameterError(f"--reference-command: cannot run {argv[0]!r} ({exc})") from None
    wall = time.perf_counter() - t0
    cpu = _children_cpu_s() - c0
    if done.returncode != 0:
        tail = (done.stderr or done.stdout).strip().splitlines()[-1:] or ["no output"]
        raise ParameterError(f"--reference-command exited with status {done.returncode}: {tail[0]}")
    found = {m[1]: (float(m[2]), float(m[3])) for m in _ESTIMATE_LINE.finditer(done.stdout)}
    return wall, cpu, found


# ------------------------------------------------------------------------------------------- measuring


def _timed_run(stack, photons, seed, threads) -> tuple[float, float, object]:
    c0 = time.process_time()
    t0 = time.perf_counter()
    res = simulate(stack, photons, seed, threads=threads)
    return time.perf_counter() - t0, time.process_time() - c0, res


def _z(a, b) -> float:
    """Difference of two estimates (value, stderr) in combined standard errors."""
    se = math.hypot(a[1], b[1])
    return (a[0] - b[0]) / se if se > 0 else math.inf * (a[0] != b[0])


def measure_configuration(name, stack, photons, seed, repeats, thread_counts, reference=None, tmp=None):
    """Interleaved rounds of matgen (each thread count), the ceiling loop and the reference; see docstring."""
    scat = interactions(stack, photons, seed)
    layers_path = None
    if reference:
        layers_path = Path(tmp) / f"{name.replace(' ', '_')}.layers"
        write_layers_file(stack, layers_path)
    best = {t: (math.inf, math.inf) for t in thread_counts}
    best_ceiling = best_ref = (math.inf, math.inf)
    rounds_ceiling, rounds_ref = [], []
    ref_est = res = None
    for _ in range(max(1, repeats)):
        for t in thread_counts:
            wall, cpu, res = _timed_run(stack, photons, seed, t)
            best[t] = (min(best[t][0], wall), min(best[t][1], cpu))
            if t == 1:
                one = (wall, cpu)
        c = _time_ceiling(stack, scat, seed)
        best_ceiling = (min(best_ceiling[0], c[0]), min(best_ceiling[1], c[1]))
        rounds_ceiling.append(c[1] / one[1])
        if reference:
            r_wall, r_cpu, ref_est = run_reference(reference, layers_path, photons, seed)
            best_ref = (min(best_ref[0], r_wall), min(best_ref[1], r_cpu))
            rounds_ref.append(r_cpu / one[1])
    row = {"photons": photons, "interactions": scat, "interactions_per_photon": scat / photons}
    for t in thread_counts:
        row[f"photons_per_second_{t}t"] = photons / best[t][0]
        row[f"photons_per_cpu_second_{t}t"] = photons / best[t][1] if best[t][1] > 0 else 0.0
    row["interactions_per_cpu_second_1t"] = scat / best[1][1]
    row["ns_per_interaction_1t"] = best[1][1] / scat * 1e9 if scat else math.nan
    row["ceiling_ns_per_interaction"] = best_ceiling[1] / scat * 1e9 if scat else math.nan
    row["fraction_of_ceiling_1t"] = best_ceiling[1] / best[1][1]
    row["fraction_of_ceiling_wall_1t"] = best_ceiling[0] / best[1][0]
    row["fraction_of_ceiling_rounds"] = [min(rounds_ceiling), max(rounds_ceiling)]
    if 2 in best:
        row["scaling_2t_over_1t"] = best[1][0] / best[2][0]
    if reference:
        row["reference_photons_per_cpu_second"] = photons / best_ref[1] if best_ref[1] > 0 else math.inf
        row["ratio_to_reference_1t"] = best_ref[1] / best[1][1]
        row["ratio_to_reference_wall_1t"] = best_ref[0] / best[1][0]
        row["ratio_to_reference_rounds"] = [min(rounds_ref), max(rounds_ref)]
        for key, est in (ref_est or {}).items():
            mine = res.diffuse_reflectance if key == "Rd" else res.transmittance
            row[f"reference_{key}"] = est
            row[f"matgen_{key}"] = (mine.value, mine.stderr)
            row[f"z_{key}"] = _z((mine.value, mine.stderr), est)
    return row


def measure_reweighting(stack, photons, sets, repeats, seed, threads) -> dict:
    """Cost per absorption set of reweighting vs a direct run with records, for ``sets`` and for 2 sets."""
    t_direct = c_direct = math.inf
    for _ in range(max(1, repeats)):
        t0 = time.perf_counter()
        c0 = time.process_time()
        _, rec = simulate(stack, photons, seed, threads=threads, records=True)
        t_direct = min(t_direct, time.perf_counter() - t0)
        c_direct = min(c_direct, time.process_time() - c0)
    rng = np.random.default_rng(seed)
    mu = stack.mu_a[None, :] * np.exp(rng.uniform(-1.0, 1.0, size=(max(2, sets), stack.n_layers)))
    reweight(rec, mu[:2], threads=threads)  # compile, and prepare the records once
    out = {"photons": photons, "threads": threads, "direct_run_s": t_direct, "record_bytes": rec.nbytes}
    for label, m in (("many", mu), ("few", mu[:2])):
        best = best_cpu = math.inf
        for _ in range(max(1, repeats)):
            t0 = time.perf_counter()
            c0 = time.process_time()
            reweight(rec, m, threads=threads)
            best = min(best, time.perf_counter() - t0)
            best_cpu = min(best_cpu, time.process_time() - c0)
        k = m.shape[0]
        out[label] = {
            "sets": k,
            "seconds_per_set": best / k,
            "direct_over_reweight_per_set": t_direct / (best / k),
            "direct_over_reweight_per_set_cpu": c_direct / (best_cpu / k) if best_cpu > 0 else math.inf,
        }
    return out


def measure(photons=200_000, sets=64, repeats=3, seed=1, reference_command=None) -> dict:
    """Run the whole benchmark and return its figures (see the module docstring)."""
    stacks = benchmark_stacks()
    most = int(numba.config.NUMBA_NUM_THREADS)
    thread_counts = [1, 2] if most >= 2 else [1]
    for stack in stacks.values():  # compile and warm up every kernel
        simulate(stack, 1000, seed)
        simulate(stack, 1000, seed, records=True)
        interactions(stack, 100, seed)
        _time_ceiling(stack, 1000, seed)
    out = {"configurations": {}, "threads_available": most, "load_average": os.getloadavg()}
    with tempfile.TemporaryDirectory(prefix="matgen-bench-") as tmp:
        for name, stack in stacks.items():
            n = photons * SLAB_PHOTON_FACTOR if name == "matched slab" else photons
            out["configurations"][name] = measure_configuration(
                name, stack, n, seed, repeats, thread_counts, reference_command, tmp
            )
    out["reweighting"] = measure_reweighting(
        stacks["550 nm"], photons, sets, repeats, seed, max(thread_counts)
    )
    out["load_average_after"] = os.getloadavg()
    return out


# -------------------------------------------------------------------------------------------- printing


def _fmt_range(r) -> str:
    return f"{r[0]:.2f}-{r[1]:.2f}"


def print_report(res: dict, repeats: int) -> None:
    """Print the figures of :func:`measure` as a table of ratios measured side by side."""
    nan = math.nan
    la0, la1 = res["load_average"][0], res["load_average_after"][0]
    print(
        f"transport benchmark (numba threads available: {res['threads_available']}; best of {repeats} "
        f"interleaved rounds; 1-minute load average {la0:.2f} before, {la1:.2f} after)"
    )
    print(
        "  ph/s: photons per second of elapsed time; Mint/s, ns/int (per scattering event) and 'of ceiling' "
        "(the step loop's ns over matgen's, range of the rounds) by CPU time of one thread; 'wall': the same "
        "ratio by elapsed time"
    )
    print(
        f"  {'configuration':<13s} {'photons':>9s} {'scat/ph':>8s} {'ph/s 1t':>10s} {'ph/s 2t':>10s} "
        f"{'2t/1t':>6s} {'Mint/s':>7s} {'ns/int':>7s} {'ceil ns':>8s} {'of ceiling':>16s} {'wall':>5s}"
    )
    for name, row in res["configurations"].items():
        print(
            f"  {name:<13s} {row['photons']:>9d} {row['interactions_per_photon']:>8.1f} "
            f"{row['photons_per_second_1t']:>10.0f} {row.get('photons_per_second_2t', nan):>10.0f} "
            f"{row.get('scaling_2t_over_1t', nan):>6.2f} {row['interactions_per_cpu_second_1t'] / 1e6:>7.2f} "
            f"{row['ns_per_interaction_1t']:>7.1f} {row['ceiling_ns_per_interaction']:>8.1f} "
            f"{row['fraction_of_ceiling_1t']:>5.2f} ({_fmt_range(row['fraction_of_ceiling_rounds'])}) "
            f"{row['fraction_of_ceiling_wall_1t']:>5.2f}"
        )
    rows = [(n, r) for n, r in res["configurations"].items() if "ratio_to_reference_1t" in r]
    if rows:
        print(
            "reference command, one core each, interleaved: photons per CPU second, matgen (1 thread) over "
            "the reference, best of each (range of the rounds), and by wall clock:"
        )
        for name, row in rows:
            agree = "; ".join(
                f"{q} {row[f'matgen_{q}'][0]:.5f} vs {row[f'reference_{q}'][0]:.5f} (z {row[f'z_{q}']:+.1f})"
                for q in ("Rd", "Tt")
                if f"z_{q}" in row
            )
            print(
                f"  {name:<13s} reference {row['reference_photons_per_cpu_second']:>10.0f} ph/s: matgen "
                f"x{row['ratio_to_reference_1t']:.2f} ({_fmt_range(row['ratio_to_reference_rounds'])}), "
                f"wall x{row['ratio_to_reference_wall_1t']:.2f}" + (f"; {agree}" if agree else "")
            )
    rw = res["reweighting"]
    for label in ("many", "few"):
        r = rw[label]
        print(
            f"reweighting {r['sets']:>3d} sets of {rw['photons']} photons ({rw['threads']} threads): "
            f"{r['seconds_per_set'] * 1e3:.2f} ms per set vs {rw['direct_run_s']:.2f} s for the direct run "
            f"with records: {r['direct_over_reweight_per_set']:.0f}x cheaper by wall clock, "
            f"{r['direct_over_reweight_per_set_cpu']:.0f}x by CPU time"
        )
    print(f"records {rw['record_bytes'] / 1e6:.1f} MB")


def run(args) -> int:
    """``matgen bench transport``."""
    from matgen.limits import check_photons

    check_photons(args.photons)
    res = measure(args.photons, args.sets, args.repeats, args.seed, args.reference_command)
    print_report(res, args.repeats)
    return 0
