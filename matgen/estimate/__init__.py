"""matgen.estimate: from a colour albedo to pigment maps, by inverting a lookup table's albedo per texel.

Units: pigment values in their fields' units (volume fractions, shares in [0, 1]); colours as linear RGB in
the table's working space; residuals in CIEDE2000. Estimated pigments describe an image, not a person: no
clinical, diagnostic or dosimetric use.

Modules: :mod:`~matgen.estimate.perceptual` (CIELAB, CIEDE2000 kernels), :mod:`~matgen.estimate.kernels`
(the interpolant with its gradient, damped Gauss-Newton), :mod:`~matgen.estimate.solver` (which axes are
estimated, held or given a prior; the coarse inverse grid), :mod:`~matgen.estimate.inputs` (colour spaces,
albedo and capture files), :mod:`~matgen.estimate.run` (the job), :mod:`~matgen.estimate.summary`,
:mod:`~matgen.estimate.bench`.
"""
