"""matgen.fit: profile fits, effective-medium inversion and RGB / pass reduction.

Units: lengths in mm, profiles in mm^-2, albedos dimensionless; renderer scene units only in
:mod:`matgen.targets` through an explicit ``metres_per_scene_unit``.

Entry points: :func:`matgen.fit.diffusion.fit_burley2015` (vectorised profile fit),
:func:`matgen.fit.inversion.effective_medium`, :func:`matgen.fit.summary.summarize` (the table quantities),
:data:`matgen.targets.TARGETS`.
"""
