"""Transport: layered-slab Monte Carlo photon transport. Units: mm, 1/mm, dimensionless weights.

This stage knows nothing of pigments: it takes a :class:`~matgen.transport.stack.Stack` of plain
per-layer arrays and returns tallies with standard errors.
"""
