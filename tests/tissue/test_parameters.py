"""SkinParameters validation and region presets."""

import math

import pytest

from matgen.errors import MatgenError, ParameterError
from matgen.tissue.parameters import FIELD_SPECS, LAYER_FRACTIONS, SkinParameters
from matgen.tissue.presets import preset, preset_names


def test_defaults_are_valid_and_every_field_has_a_cited_range():
    p = SkinParameters()
    for name, spec in FIELD_SPECS.items():
        assert spec.low <= getattr(p, name) <= spec.high
        assert spec.source and spec.unit


@pytest.mark.parametrize("name", list(FIELD_SPECS))
@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf, -1.0, 1e9])
def test_bad_values_are_refused_naming_field_value_and_range(name, bad):
    with pytest.raises(ParameterError) as exc:
        SkinParameters().replace(**{name: bad})
    msg = str(exc.value)
    assert name in msg
    spec = FIELD_SPECS[name]
    assert f"{spec.high:g}" in msg  # the allowed range is named


@pytest.mark.parametrize("bad", ["0.1", None, True, [0.1]])
def test_non_numbers_are_refused(bad):
    with pytest.raises(ParameterError, match="blood_fraction"):
        SkinParameters(blood_fraction=bad)


def _overfull(layer):
    return {n: min(FIELD_SPECS[n].high, 0.7) for n in LAYER_FRACTIONS[layer]}


# the stratum corneum has one fraction (water, at most 0.6): it cannot overfill
@pytest.mark.parametrize("layer", [k for k in LAYER_FRACTIONS if sum(_overfull(k).values()) > 1])
def test_fractions_of_one_layer_cannot_sum_above_one(layer):
    changes = _overfull(layer)
    # papillary and reticular dermis share their fractions: the first layer found is named
    expect = "dermis" if "dermis" in layer else layer
    with pytest.raises(ParameterError, match=f"layer '[a-z_]*{expect}' sum to"):
        SkinParameters().replace(**changes)


def test_replace_unknown_field_and_roundtrip():
    p = SkinParameters()
    with pytest.raises(ParameterError, match="unknown SkinParameters field"):
        p.replace(melanin=0.1)
    q = p.replace(melanin_fraction=0.2)
    assert q.melanin_fraction == 0.2 and p.melanin_fraction != 0.2
    assert SkinParameters.from_dict(q.to_dict()) == q


def test_thickness_scale_multiplies_every_layer():
    p = SkinParameters()
    assert p.replace(thickness_scale=2.0).thicknesses_mm() == pytest.approx(
        [2 * t for t in p.thicknesses_mm()]
    )


def test_presets():
    names = preset_names()
    assert {"cheek", "forehead", "palm", "forearm"} <= set(names)
    for name in names:
        assert isinstance(preset(name), SkinParameters)
    # palms: thick stratum corneum (Whitton & Everall 1973); face: thin
    assert preset("palm").stratum_corneum_thickness_mm > 5 * preset("cheek").stratum_corneum_thickness_mm
    with pytest.raises(ParameterError, match="unknown preset 'nose'.*cheek"):
        preset("nose")
    assert issubclass(ParameterError, MatgenError)
