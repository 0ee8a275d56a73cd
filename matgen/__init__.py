"""matgen: skin subsurface-scattering parameters for renderers, from pigmentation.

Units inside matgen: wavelength in nm, lengths in mm, coefficients in 1/mm, fractions in [0, 1].

The pipeline (one direction): spectra -> tissue -> transport -> fit -> tables -> bake -> export -> preview.
Each stage is importable on its own (``matgen.tissue``, ``matgen.transport`` ...); the command line in
``matgen.cli`` wires them together for a person.
"""

__version__ = "0.1.0"
