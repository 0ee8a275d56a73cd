"""Property checks over random valid and invalid parameter sets (hypothesis)."""

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from matgen.errors import ParameterError
from matgen.spectra.bands import BandSet
from matgen.tissue.optics import skin_optics
from matgen.tissue.parameters import FIELD_SPECS, LAYER_FRACTIONS, SkinParameters

BANDS = BandSet.parse("300,365,450,550,650,850,940,1000")


@st.composite
def valid_parameters(draw):
    values = {}
    for name, spec in FIELD_SPECS.items():
        values[name] = draw(st.floats(spec.low, spec.high, allow_nan=False))
    # shrink each layer's fractions proportionally until they fit
    for names in LAYER_FRACTIONS.values():
        total = sum(values[n] for n in names)
        if total > 1.0:
            for n in names:
                values[n] = values[n] / total * 0.999
    return SkinParameters(**values)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(valid_parameters())
def test_any_valid_parameters_give_finite_positive_optics(p):
    o = skin_optics(p, BANDS)
    assert np.all(np.isfinite(o.mu_a)) and np.all(o.mu_a >= 0)
    assert np.all(o.mu_s > 0) and np.all((o.g > -1) & (o.g < 1)) and np.all(o.n >= 1)
    assert np.all(o.thickness_mm > 0)
    off = skin_optics(p, BANDS, packaging="off")
    assert np.all(o.mu_a <= off.mu_a * (1 + 1e-12))  # packaging never adds absorption


@settings(max_examples=80, deadline=None)
@given(st.sampled_from(list(FIELD_SPECS)), st.floats(allow_nan=True, allow_infinity=True))
def test_out_of_range_values_are_always_refused(name, value):
    spec = FIELD_SPECS[name]
    assume(not (math.isfinite(value) and spec.low <= value <= spec.high))
    with pytest.raises(ParameterError, match=name):
        SkinParameters().replace(**{name: value})
