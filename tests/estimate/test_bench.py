"""``matgen bench estimate`` runs end to end on a small albedo.

It reports figures that hold the requirement.
"""

import json

from matgen.cli import main


def test_bench_estimate_small(capsys):
    assert main(["bench", "estimate", "--size", "32", "--roundtrip-size", "16", "--json"]) == 0
    figures = json.loads(capsys.readouterr().out)
    assert figures["texels"] == 32 * 32 and figures["texels_per_s"] > 0 and figures["peak_memory_mib"] > 0
    for case in ("noise_free", "capture_noise"):
        rt = figures["round_trip"][case]
        assert rt["de2000_median"] <= 0.5 and rt["de2000_p95"] <= 1.0
    assert figures["round_trip"]["noise_free"]["melanin_rel_error_p95"] < 0.01
