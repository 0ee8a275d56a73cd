"""Build matgen's boundary-aware inversion table: A(alpha, g, n) by adding-doubling, l/d by transport.

Two parts, each on its own grid, written together to ``matgen/fit/data/inversion_table.npz`` with the
provenance record ``inversion_table.provenance.json``:

1. **Diffuse albedo** A(alpha, g, n) of a half-space of single-scattering albedo alpha, Henyey-Greenstein
   anisotropy g and refractive index n under air, normal incidence, specular reflection excluded, from
   the adding-doubling method of ``iadpython`` (Prahl, van Gemert & Welch 1993; ``iadpython.Sample(a, b,
   g, n, n_above=1, n_below=1, quad_pts=16).rt()``, UR1 minus ((n - 1)/(n + 1))^2) for an optical
   thickness b = 1e6 (a half-space at every node: b = 1e4 already transmits 1e-3 at alpha = 1 - 1e-6,
   g = 0.95). Nodes: van de Hulst's similarity parameter s = sqrt((1 - alpha)/(1 - g alpha)) on
   s_k = sin^2(pi k / (2 (K - 1))) (dense near both ends, where A changes fastest), g on uniform steps,
   n on steps about uniform in the critical cosine sqrt(1 - 1/n^2) near n = 1, uniform above 1.16.
   Stored: y = ln(A / alpha), smooth and finite at both ends (A / alpha -> 1 - R_specular(n) at
   alpha = 1, the single-scattering limit at alpha -> 0, evaluated at alpha = 1e-6).
2. **Profile scaling** l/d = 1/d (d the normalised-diffusion shape distance fitted with A conserved,
   Christensen & Burley 2015; sigma_t = 1/mm so that lengths are in mean free paths) from matgen's own
   transport engine, with an error from two independent halves of the photons. The half-space is a slab
   of max(200, 30 diffusion lengths) mean free paths, index matched below; its transmittance must stay
   below 1e-4. The end nodes alpha = 0 and 1 carry no profile (NaN).

Run from the repository root:

    python tools/make_inversion_table.py [--photons 40000] [--seed 20261201] [--workers 2]
    python tools/make_inversion_table.py --albedo-only      # part 1 only; part 2 copied from the shipped file

``--albedo-only`` keeps the shipped table's scaling part (grid, values, and its provenance entries);
``--reuse-scaling`` copies the shipped table's transport nodes that the new grid shares (recorded under
``nodes_reused_from``) and simulates only the others. ``--grid-only`` / ``--scaling-only`` compute one part
into a file, ``--grid-from`` / ``--scaling-from`` assemble the table from such files.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

from matgen import __version__
from matgen.fit.albedo_grid import AlbedoGrid
from matgen.fit.inversion import InversionTable, specular_reflectance_normal

OUT = Path(__file__).resolve().parents[1] / "matgen" / "fit" / "data"

#: Part 1 grid: similarity nodes (sin^2 spacing), anisotropy and index nodes.
S_NODE_COUNT = 33
AD_G_NODES = np.round(np.arange(0.0, 0.951, 0.05), 10)
#: n nodes: n - 1 = 0.0025 k^2 up to 1.1225 (about uniform in the critical cosine sqrt(1 - 1/n^2), in which A
#: is smooth near n = 1; see matgen.fit.albedo_grid), then steps of 0.04-0.05 up to 1.6.
AD_N_NODES = np.array(
    [
        1.0,
        1.0025,
        1.01,
        1.0225,
        1.04,
        1.0625,
        1.09,
        1.1225,
        1.16,
        1.2,
        1.25,
        1.3,
        1.35,
        1.4,
        1.45,
        1.5,
        1.55,
        1.6,
    ]
)
AD_OPTICAL_THICKNESS = 1e6
AD_QUAD_PTS = 16
#: Stands for alpha -> 0 at s = 1 (A / alpha changes by < 1e-5 relative below 1e-5).
AD_SMALLEST_ALPHA = 1e-6

#: Part 2 grid: u = sqrt(1 - alpha) nodes (0 and 1 carry no profile), anisotropy and index nodes.
U_NODES = np.array([0.0, 0.03, 0.05, 0.075, 0.1, 0.14, 0.2, 0.27, 0.35, 0.45, 0.6, 0.8, 0.95, 1.0])
G_NODES = np.array([0.0, 0.4, 0.7, 0.8, 0.9, 0.95])
N_NODES = np.array([1.0, 1.33, 1.4, 1.47, 1.55, 1.6])


def similarity_nodes(count=S_NODE_COUNT):
    """s_k = sin^2(pi k / (2 (K - 1))), k = 0 .. K - 1: 0 first, 1 last."""
    s = np.sin(0.5 * np.pi * np.linspace(0.0, 1.0, count)) ** 2
    s[0], s[-1] = 0.0, 1.0
    return s


def _ad_column(args):
    """y = ln(A / alpha) at every s node for one (g, n)."""
    import iadpython

    s_nodes, g, n = args
    rsp = float(specular_reflectance_normal(n))
    out = np.empty(s_nodes.size)
    for k, s in enumerate(s_nodes):
        if s == 0.0:
            out[k] = np.log(1.0 - rsp)
            continue
        alpha = max((1.0 - s * s) / (1.0 - g * s * s), AD_SMALLEST_ALPHA)
        ur1 = iadpython.Sample(
            a=alpha, b=AD_OPTICAL_THICKNESS, g=g, n=n, n_above=1.0, n_below=1.0, quad_pts=AD_QUAD_PTS
        ).rt()[0]
        out[k] = np.log((ur1 - rsp) / alpha)
    return out


def albedo_grid_provenance(s_nodes, seconds):
    """Provenance record of part 1."""
    import iadpython

    return {
        "source": f"iadpython {iadpython.__version__} adding-doubling (Prahl, van Gemert & Welch 1993): "
        f"Sample(a=alpha, b={AD_OPTICAL_THICKNESS:g}, g, n, n_above=1, n_below=1, "
        f"quad_pts={AD_QUAD_PTS}).rt() UR1 minus ((n - 1)/(n + 1))^2; "
        f"alpha = {AD_SMALLEST_ALPHA:g} stands for alpha -> 0 at s = 1",
        "quantity": "y = ln(A / alpha) on (s, g, n), s = sqrt((1 - alpha)/(1 - g alpha))",
        "interpolation": "monotone cubic (Fritsch-Carlson) in s after 4-point Lagrange cubics in g and in "
        "sqrt(1 - 1/n^2)",
        "s_nodes": f"sin^2(pi k / (2 (K - 1))), K = {s_nodes.size}",
        "g_nodes": AD_G_NODES.tolist(),
        "n_nodes": AD_N_NODES.tolist(),
        "seconds": round(seconds, 1),
    }


def build_albedo_grid(workers):
    """Part 1: the adding-doubling grid as an :class:`AlbedoGrid`."""
    t0 = time.time()
    s_nodes = similarity_nodes()
    jobs = [(s_nodes, float(g), float(n)) for g in AD_G_NODES for n in AD_N_NODES]
    with ProcessPoolExecutor(max_workers=workers) as pool:
        cols = list(pool.map(_ad_column, jobs, chunksize=4))
    y = np.stack(cols, axis=1).reshape(s_nodes.size, AD_G_NODES.size, AD_N_NODES.size)
    prov = albedo_grid_provenance(s_nodes, time.time() - t0)
    return AlbedoGrid(s_nodes, AD_G_NODES, AD_N_NODES, y, prov)


def _node_seed(base, alpha, g, n):
    """Seed of one transport node from its values (not its position in the grid)."""
    text = json.dumps([int(base), round(float(alpha), 12), round(float(g), 12), round(float(n), 12)])
    return int.from_bytes(hashlib.sha256(text.encode()).digest()[:4], "little")


def run_node(args):
    """A, its stderr, s = 1/d and its stderr, transmittance for one transport node."""
    from matgen.fit.diffusion import fit_burley2015
    from matgen.transport.simulate import combine, default_ring_edges_mm, simulate
    from matgen.transport.stack import Stack

    alpha, g, n, photons, seed = args
    diffusion_length = 1.0 / np.sqrt(3.0 * (1.0 - alpha) * (1.0 - alpha * g))
    thickness = max(200.0, 30.0 * diffusion_length)
    stack = Stack([thickness], [n], [1.0 - alpha], [alpha], [g], n_above=1.0, n_below=n)
    edges = default_ring_edges_mm()
    half = photons // 2
    parts = [simulate(stack, half, seed=seed, first_photon=k * half, ring_edges_mm=edges) for k in range(2)]
    full = combine(parts, stack)
    a = full.diffuse_reflectance
    fits = fit_burley2015(
        edges,
        np.stack([p.radial_reflectance_per_mm2 for p in [full, *parts]]),
        np.stack([p.radial_stderr_per_mm2 for p in [full, *parts]]),
        np.array([p.diffuse_reflectance.value for p in [full, *parts]]),
    )
    s_all = 1.0 / fits["shape_distance_mm"]
    s_err = 0.5 * abs(s_all[1] - s_all[2])  # half the difference of two independent halves
    return a.value, a.stderr, s_all[0], s_err, full.transmittance.value


def _reused_node(old, alpha, g, n):
    """(A, A_err, l/d, l/d_err) of ``old`` at exactly this node, or None."""
    if old is None:
        return None
    i = np.flatnonzero(np.isclose(old.albedo_single, alpha, rtol=0, atol=1e-12))
    j = np.flatnonzero(np.isclose(old.g, g, rtol=0, atol=1e-12))
    k = np.flatnonzero(np.isclose(old.n, n, rtol=0, atol=1e-12))
    if not (i.size and j.size and k.size) or np.isnan(old.shape_scaling[i[0], j[0], k[0]]):
        return None
    idx = (i[0], j[0], k[0])
    return (
        old.albedo_multiple[idx],
        old.albedo_multiple_stderr[idx],
        old.shape_scaling[idx],
        old.shape_scaling_stderr[idx],
        0.0,
    )


def build_scaling_part(photons, seed, workers, reuse=None):
    """Part 2: transport nodes; returns the arrays and provenance entries.

    ``reuse``: an :class:`InversionTable` whose nodes (same alpha, g, n) are copied instead of simulated.
    """
    alpha_nodes = 1.0 - U_NODES[::-1] ** 2  # ascending: 0 ... 1
    shape = (alpha_nodes.size, G_NODES.size, N_NODES.size)
    a_tab = np.zeros(shape)
    a_err = np.zeros(shape)
    s_tab = np.full(shape, np.nan)
    s_err = np.full(shape, np.nan)
    a_tab[-1] = 1.0 - specular_reflectance_normal(N_NODES)[None, :]
    index = [
        (i, j, k) for j in range(G_NODES.size) for k in range(N_NODES.size) for i in range(1, shape[0] - 1)
    ]
    t0 = time.time()
    worst_t = 0.0
    reused = 0
    for i, j, k in list(index):
        res = _reused_node(reuse, alpha_nodes[i], G_NODES[j], N_NODES[k])
        if res is not None:
            a_tab[i, j, k], a_err[i, j, k], s_tab[i, j, k], s_err[i, j, k], _ = res
            index.remove((i, j, k))
            reused += 1
    jobs = [
        (
            alpha_nodes[i],
            G_NODES[j],
            N_NODES[k],
            photons,
            _node_seed(seed, alpha_nodes[i], G_NODES[j], N_NODES[k]),
        )
        for i, j, k in index
    ]
    with ProcessPoolExecutor(max_workers=workers) as pool:
        for (i, j, k), res in zip(index, pool.map(run_node, jobs), strict=True):
            a_tab[i, j, k], a_err[i, j, k], s_tab[i, j, k], s_err[i, j, k], t = res
            worst_t = max(worst_t, t)
            print(
                f"alpha={alpha_nodes[i]:.6f} g={G_NODES[j]:.2f} n={N_NODES[k]:.2f}: "
                f"A={res[0]:.5f}+-{res[1]:.5f} "
                f"l/d={res[2]:.4f}+-{res[3]:.4f} T={t:.1e} ({time.time() - t0:.0f} s)",
                flush=True,
            )
    if worst_t > 1e-4:
        raise SystemExit(f"transmittance {worst_t:g} through the half-space slab: make it thicker")
    prov = {
        "scaling_source": "matgen transport engine (matgen.transport.simulate), homogeneous half-space, "
        "normal "
        "incidence, smooth boundary of index n against air; shape scaling from the normalised-diffusion "
        "fit (Christensen2015) with A conserved",
        "scaling_resampling": "none: nodes simulated directly; lookups interpolate linearly in the "
        "similarity "
        "parameter and bilinearly in (g, n)",
        "photons_per_node": int(photons),
        "seed": int(seed),
        "seed_rule": "first 4 bytes (little endian) of SHA-256 of JSON [seed, alpha, g, n] (12 decimals)",
        "u_nodes": U_NODES.tolist(),
        "scaling_g_nodes": G_NODES.tolist(),
        "scaling_n_nodes": N_NODES.tolist(),
        "max_transmittance": worst_t,
        "scaling_seconds": round(time.time() - t0, 1),
        "nodes_simulated": len(index),
        "nodes_reused": reused,
    }
    if reuse is not None:
        prov["nodes_reused_from"] = {
            k: reuse.provenance.get(k)
            for k in ("seed", "photons_per_node", "matgen_version", "g_nodes", "n_nodes")
        }
        prov["nodes_reused_from"]["seed_rule"] = reuse.provenance.get(
            "seed_rule", "seed + 1000 (i Ng + j) Nn + k over that build's node indices (i alpha, j g, k n)"
        )
    return (alpha_nodes, G_NODES, N_NODES, a_tab, a_err, s_tab, s_err), prov


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--photons", type=int, default=40000)
    ap.add_argument("--seed", type=int, default=20261201)
    ap.add_argument("--workers", type=int, default=2, help="processes for the adding-doubling part")
    ap.add_argument(
        "--scaling-workers",
        type=int,
        default=1,
        help="processes for the transport part (each already uses numba's threads)",
    )
    ap.add_argument(
        "--grid-from",
        metavar="NPZ",
        help="take part 1 from a file written by --grid-only instead of recomputing it",
    )
    ap.add_argument("--grid-only", metavar="NPZ", help="compute part 1 only and write it to NPZ")
    ap.add_argument("--scaling-only", metavar="NPZ", help="compute part 2 only and write it to NPZ")
    ap.add_argument("--scaling-from", metavar="NPZ", help="take part 2 from a file written by --scaling-only")
    ap.add_argument("--albedo-only", action="store_true", help="keep the shipped table's scaling part")
    ap.add_argument(
        "--reuse-scaling",
        action="store_true",
        help="copy the shipped table's transport nodes that the new grid shares; simulate the rest",
    )
    args = ap.parse_args()
    old = None
    if args.albedo_only or args.reuse_scaling:
        old = InversionTable.load(OUT / "inversion_table.npz", OUT / "inversion_table.provenance.json")
    if args.scaling_only:
        arrays, prov = build_scaling_part(args.photons, args.seed, args.scaling_workers, reuse=old)
        np.savez(args.scaling_only, *arrays, provenance=json.dumps(prov))
        print(f"wrote {args.scaling_only}")
        return
    if args.grid_from:
        z = np.load(args.grid_from)
        grid = AlbedoGrid(z["s"], z["g"], z["n"], z["y"], json.loads(str(z["provenance"])))
    else:
        grid = build_albedo_grid(args.workers)
    print(f"adding-doubling grid {grid.log_ratio.shape} in {grid.provenance['seconds']} s", flush=True)
    if args.grid_only:
        np.savez(
            args.grid_only,
            s=grid.similarity,
            g=grid.g,
            n=grid.n,
            y=grid.log_ratio,
            provenance=json.dumps(grid.provenance),
        )
        print(f"wrote {args.grid_only}")
        return
    if args.albedo_only:
        arrays = (
            old.albedo_single,
            old.g,
            old.n,
            old.albedo_multiple,
            old.albedo_multiple_stderr,
            old.shape_scaling,
            old.shape_scaling_stderr,
        )
        prov = {k: v for k, v in old.provenance.items() if k != "albedo_grid"}
    elif args.scaling_from:
        z = np.load(args.scaling_from)
        arrays = tuple(z[f"arr_{i}"] for i in range(7))
        prov = json.loads(str(z["provenance"]))
    else:
        arrays, prov = build_scaling_part(args.photons, args.seed, args.scaling_workers, reuse=old)
    provenance = {
        "source": "A(alpha, g, n): adding-doubling (see albedo_grid); l/d: matgen's transport "
        "(see scaling_source)",
        "units": "albedo_single, albedo_multiple, shape_scaling dimensionless; lengths in mean free paths",
        "license": "BSD-3-Clause (generated by matgen)",
        "wavelength_range_nm": None,
        "resampling": "A: monotone cubic in s of ln(A / alpha), cubic in g and n (albedo_grid); "
        "l/d: see scaling_resampling",
        "generated_by": "tools/make_inversion_table.py",
        "matgen_version": __version__,
        **prov,
        "albedo_grid": grid.provenance,
    }
    table = InversionTable(*arrays, provenance, albedo_grid=grid)
    OUT.mkdir(parents=True, exist_ok=True)
    table.save(OUT / "inversion_table.npz", OUT / "inversion_table.provenance.json")
    print(f"wrote {OUT / 'inversion_table.npz'}")


if __name__ == "__main__":
    main()
