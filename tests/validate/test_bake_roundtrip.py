"""`matgen validate --bake`: a bake read back through its files reproduces the skin of its texels.

A small bake with the shipped default table (pigments from light to dark, every texel off the table's
nodes) is read as a renderer reads it: each texel's maps as stored (OpenImageIO), each target's medium
rebuilt by its ``from_inputs``, the deep slab solved by adding-doubling (iadpython 0.5.3, 16 quadrature
points, optical thickness 1e4, specular removed) under the exported index, and compared with a fresh
layered Monte Carlo of the texel's own pigments. Bounds: 3 combined relative standard errors (fresh
transport, the table's stored A error, adding-doubling's 2e-4) plus the stated allowance (2.5 % per band,
2 % per channel) and dE2000 <= 1.0; they are recomputed here from that rule. About a minute on 2 cores.
"""

import json
import shutil

import numpy as np
import OpenImageIO as oiio
import pytest

from matgen.cli import main
from matgen.preview import roundtrip
from matgen.tables.store import Table, load_default_table

pytest.importorskip("iadpython")

CONFIG = """
format_version = 1
name = "roundtrip_check"
[scene]
metres_per_scene_unit = 0.01
[parameters.melanin_fraction]
map = "maps/melanin.exr"
encoding = "linear"
range = [0.005, 0.4]
[parameters.blood_fraction]
map = "maps/blood.exr"
encoding = "linear"
range = [0.002, 0.15]
[parameters.eumelanin_share]
value = 0.63
[parameters.oxygen_saturation]
value = 0.77
[outputs]
spectral = ["albedo_multiple"]
spectral_bands = "400,550,700,850"
rgb = ["albedo_multiple"]
targets = ["openpbr", "standard_surface", "spectral_medium", "reflectance_mfp"]
passes = []
qa = true
materialx = true
"""


def _write(path, values):
    v = np.asarray(values, dtype=np.float32)[:, :, None]
    out = oiio.ImageOutput.create(str(path))
    assert out.open(str(path), oiio.ImageSpec(v.shape[1], v.shape[0], 1, oiio.FLOAT))
    assert out.write_image(v)
    out.close()


@pytest.fixture(scope="module")
def baked(tmp_path_factory):
    root = tmp_path_factory.mktemp("roundtrip")
    (root / "maps").mkdir()
    h, w = 4, 8
    y, x = np.mgrid[0:h, 0:w]
    # melanin 0.006-0.3 and blood 0.003-0.06, log-spaced at offsets that miss every table node
    mel = np.exp(np.log(0.006) + np.log(0.3 / 0.006) * (x + 0.37) / w)
    blood = np.exp(np.log(0.003) + np.log(0.06 / 0.003) * (y + 0.41) / h)
    _write(root / "maps" / "melanin.exr", (mel - 0.005) / (0.4 - 0.005))
    _write(root / "maps" / "blood.exr", (blood - 0.002) / (0.15 - 0.002))
    (root / "material.toml").write_text(CONFIG)
    assert main(["bake", str(root / "material.toml"), "--out", str(root / "bake")]) == 0
    return root / "bake"


def test_bake_reproduces_the_skin_through_its_files(baked, tmp_path, capsys):
    out = tmp_path / "v.json"
    rc = main(["validate", "--bake", str(baked), "--quick", "--json", str(out)])
    printed = capsys.readouterr().out
    doc = json.loads(out.read_text())
    table = load_default_table()
    assert [t["label"] for t in doc["texels"]] == ["lightest", "darkest", "median"]
    for t in doc["texels"]:  # held-out: no coordinate on a table node
        for ax in table.axes:
            assert np.min(np.abs(ax.values - t["params"][ax.name])) > 1e-4 * t["params"][ax.name]
    assert {c["target"] for c in doc["checks"]} == {
        "openpbr",
        "standard_surface",
        "spectral_medium",
        "reflectance_mfp",
    }
    for c in doc["checks"]:
        rendered, ref = np.array(c["rendered"]), np.array(c["reference"])
        rel_se = np.hypot(np.array(c["rendered_stderr"]) / rendered, np.array(c["reference_stderr"]) / ref)
        allowance = 0.025 if c["target"] in ("spectral_medium", "reflectance_mfp") else 0.02
        bound = 3.0 * rel_se + allowance
        np.testing.assert_allclose(c["relative_bound"], bound)
        assert np.all(np.abs(rendered / ref - 1.0) <= bound), c
        # enough photons for the comparison to mean something (the table's own stored error, part of the
        # bound, reaches a few per cent in the dark skin's blue bands and is not the test's to choose)
        assert np.all(np.array(c["transport_stderr"]) / ref < 0.01)
        if c["target"] in ("openpbr", "standard_surface"):
            assert c["de2000"] <= 1.0, c
    assert rc == 0 and doc["passed"] is True
    assert "PASS" in printed and "FAIL" not in printed


def _copy(baked, tmp_path):
    dst = tmp_path / "bake"
    shutil.copytree(baked, dst)
    return dst


def _missing(folder):
    (folder / "openpbr" / "subsurface_color.exr").unlink()
    return "openpbr/subsurface_color.exr", []


def _modified(folder):
    with open(folder / "spectral_medium" / "albedo.exr", "ab") as fh:
        fh.write(b"\0")
    return "spectral_medium/albedo.exr", []


def _other_version(folder):
    path = folder / "material.json"
    doc = json.loads(path.read_text())
    doc["format_version"] = 1
    path.write_text(json.dumps(doc))
    return "material.json", []


def _other_table(folder):
    table = load_default_table()
    q = dict(table.quantities)
    q["albedo_multiple"] = q["albedo_multiple"] * np.float32(1.01)
    other = Table(
        axes=table.axes,
        bands=table.bands,
        quantities=q,
        working_space=table.working_space,
        illuminant=table.illuminant,
        manifest=table.manifest,
    )
    other.save(folder.parent / "other.npz")
    return "material.json", ["--table", str(folder.parent / "other.npz")]


@pytest.mark.parametrize(
    "spoil",
    [_missing, _modified, _other_version, _other_table],
    ids=["missing texture", "modified texture", "other format version", "other table"],
)
def test_bad_bake_is_refused_naming_the_file(baked, tmp_path, capsys, spoil):
    folder = _copy(baked, tmp_path)
    name, extra = spoil(folder)
    out = tmp_path / "v.json"
    rc = main(["validate", "--bake", str(folder), "--quick", "--json", str(out), *extra])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 2
    assert len(err) == 1 and name in err[0], err
    assert not out.exists()


def test_mitsuba_and_adding_doubling_agree_on_a_rebuilt_medium(baked):
    """The full command's renderer: Mitsuba 3 (scalar_spectral, deep slab of the rebuilt spectral medium at
    550 nm, dielectric boundary of the exported index) against the adding-doubling solve of the same
    medium, within 3 standard errors + 0.5 % (the deep-slab deficit recorded for the tracer scene)."""
    pytest.importorskip("mitsuba")
    from matgen.targets import get_target

    doc = json.loads((baked / "material.json").read_text())
    textures = {t["path"]: t for t in doc["textures"]}
    inputs = roundtrip.target_inputs(baked, doc["targets"]["spectral_medium"], None, 3, 2, textures)
    medium = get_target("spectral_medium").from_inputs(inputs, metres_per_scene_unit=0.01)
    k = doc["bands"]["spectral_stacks"]["centre_nm"].index(550.0)
    a, mfp, g = medium.albedo_single[k], medium.mean_free_path_mm[k], medium.anisotropy[k]
    ad = roundtrip.deep_slab_adding_doubling(a, g, medium.ior)
    mi = roundtrip.deep_slab_mitsuba(a, mfp, g, medium.ior, 545.0, 555.0, 65_536, 1)
    assert abs(mi.value - ad.value) <= 3 * np.hypot(mi.stderr, ad.stderr) + 0.005 * ad.value, (mi, ad)
