"""matgen.export: baked texels out as files a renderer loads. Units: mm inside, scene units for targets.

- :mod:`matgen.export.job`: :func:`~matgen.export.job.bake`, a whole bake into an output folder (lock,
  checks, staging, atomic commit).
- :mod:`matgen.export.exr`: streamed EXR writing in the spectral OpenEXR layout, tiled mip-maps on request.
- :mod:`matgen.export.descriptor`: the JSON material descriptor, its schema, and the checksum inspection.
- :mod:`matgen.export.materialx`: the MaterialX OpenPBR document, validated by MaterialX.
- :mod:`matgen.export.scene`: an optional Mitsuba 3 preview scene.
"""
