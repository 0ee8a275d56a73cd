"""Stacks and markers shared by the transport tests (thickness in mm, coefficients in 1/mm)."""

import numba
import pytest

from matgen.transport.stack import Stack

#: True when numba compilation is disabled (NUMBA_DISABLE_JIT=1): heavy Monte Carlo tests are skipped then.
JIT_DISABLED = bool(numba.config.DISABLE_JIT)

needs_jit = pytest.mark.skipif(JIT_DISABLED, reason="Monte Carlo accuracy tests need the compiled kernel")


def benchmark_stack(band: int = 550, mu_a=None) -> Stack:
    """Matgen's own five-layer timing stack at 550 or 800 nm (invented skin-like values, not published)."""
    d = [0.02, 0.10, 0.20, 1.80, 3.00]
    n = [1.55, 1.40, 1.40, 1.40, 1.44]
    if band == 550:
        a, s, g = [0.5, 1.5, 0.2, 0.1, 0.1], [40, 30, 20, 18, 12], [0.90, 0.80, 0.85, 0.85, 0.90]
    else:
        a, s, g = [0.2, 0.3, 0.03, 0.03, 0.03], [20, 15, 12, 11, 10], [0.90, 0.85, 0.90, 0.90, 0.90]
    return Stack(
        d,
        n,
        a if mu_a is None else mu_a,
        s,
        g,
        1.0,
        1.40,
        ("stratum corneum", "epidermis", "papillary dermis", "reticular dermis", "hypodermis"),
    )
