"""Bad input: clear errors naming the layer, field and allowed range."""

import json

import numpy as np
import pytest
from transport_cases import benchmark_stack

from matgen.errors import DataError, LimitError, ParameterError, StackError
from matgen.transport.records import PhotonRecords
from matgen.transport.simulate import simulate
from matgen.transport.stack import Stack


@pytest.mark.parametrize(
    "field,value,match",
    [
        ("thickness_mm", 0.0, r"layer 1 .*'thickness_mm'.*> 0"),
        ("thickness_mm", -1.0, r"layer 1 .*'thickness_mm'"),
        ("mu_a", -0.1, r"layer 1 .*'mu_a'.*>= 0"),
        ("mu_s", float("inf"), r"layer 1 .*'mu_s'.*finite"),
        ("g", 1.0, r"layer 1 .*'g'.*\(-1, 1\)"),
        ("g", -1.2, r"layer 1 .*'g'"),
        ("n", 0.9, r"layer 1 .*'n'.*>= 1"),
        ("mu_s", float("nan"), r"layer 1 .*'mu_s'.*finite"),
    ],
)
def test_bad_layer_fields(field, value, match):
    good = dict(thickness_mm=[0.1, 0.2], n=[1.4, 1.4], mu_a=[0.1, 0.1], mu_s=[10.0, 10.0], g=[0.8, 0.8])
    good[field] = [good[field][0], value]
    with pytest.raises(StackError, match=match):
        Stack(**good)


def test_empty_stack_and_bad_ambient():
    with pytest.raises(StackError, match="no layers"):
        Stack([], [], [], [], [])
    with pytest.raises(StackError, match="n_below"):
        Stack([0.1], [1.4], [0.1], [1.0], [0.0], n_below=0.5)


@pytest.mark.parametrize(
    "photons,exc",
    [
        (0, ParameterError),
        (-5, ParameterError),
        (2.5, ParameterError),
        (10**15, LimitError),
        ("many", ParameterError),
    ],
)
def test_bad_photon_counts(photons, exc):
    with pytest.raises(exc, match="photon"):
        simulate(benchmark_stack(), photons)


@pytest.mark.parametrize(
    "kwargs,match",
    [
        ({"seed": -1}, "seed"),
        ({"seed": 2**64}, "seed"),
        ({"threads": 0}, "threads"),
        ({"threads": 999}, "threads"),
        ({"incidence_cos": 0.0}, "incidence_cos"),
        ({"incidence_cos": 1.5}, "incidence_cos"),
        ({"ring_edges_mm": [0.0, 1.0, 0.5]}, "ring_edges_mm"),
        ({"ring_edges_mm": [-1.0, 1.0]}, "ring_edges_mm"),
        ({"exit_cos_edges": [0.0, 1.2]}, "exit_cos_edges"),
        ({"first_photon": -3}, "first_photon"),
    ],
)
def test_bad_settings(kwargs, match):
    with pytest.raises(ParameterError, match=match):
        simulate(benchmark_stack(), 10, **kwargs)


def test_not_a_stack():
    with pytest.raises(StackError, match="Stack"):
        simulate({"layers": []}, 10)


def test_bad_records_file(tmp_path):
    p = tmp_path / "bad.npz"
    p.write_bytes(b"not a zip")
    with pytest.raises(DataError, match="bad.npz"):
        PhotonRecords.load(p)
    _, rec = simulate(benchmark_stack(), 10, records=True)
    rec.meta["mu_a_ref"] = [0.1]
    q = tmp_path / "wrong.npz"
    rec.save(q)
    with pytest.raises(DataError, match="mu_a_ref"):
        PhotonRecords.load(q)
    with pytest.raises(ParameterError):
        PhotonRecords.concatenate([])
    assert json.loads(json.dumps(rec.meta))  # metadata stays JSON
    assert np.all(rec.side <= 2)
