"""Shipped lookup tables and their build specs (installed as ``matgen.lut``)."""
