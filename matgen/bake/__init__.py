"""matgen.bake: pigment maps in (OpenImageIO; single files and UDIM sets), looked up in the table per texel.

Units: parameters in their SkinParameters fields' units (volume fractions, shares in [0, 1]); lengths in mm.

- :mod:`matgen.bake.config`: the material config (TOML + JSON Schema),
  :func:`~matgen.bake.config.load_config`.
- :mod:`matgen.bake.maps`: map headers, UDIM discovery, :class:`~matgen.bake.maps.MapReader` (rows,
  resampling).
- :mod:`matgen.bake.lookup`: :class:`~matgen.bake.lookup.TexelLookup`, the table's kernel over texel strips.
- :mod:`matgen.bake.run`: :func:`~matgen.bake.run.plan_bake`, :func:`~matgen.bake.run.check_inputs`,
  :func:`~matgen.bake.run.iter_strips` (each output's texels, strip by strip).
- :mod:`matgen.bake.bench`: ``matgen bench bake``.

Writing the files is :func:`matgen.export.job.bake`.
"""
