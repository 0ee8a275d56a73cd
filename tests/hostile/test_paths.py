"""Path confinement: no map, table or texture path of a config or descriptor may leave its folder.

Escapes tried: absolute paths, '..' components, symbolic links inside the folder that point out of it, and
a UDIM pattern whose tiles lie outside. Unless allowed, each must be a PathError naming the field, before
anything is read or written; with allow_outside=True the same config bakes. The material report and its
preview readers get the same check on the texture paths of a descriptor.
"""

import json
import os
import shutil
import warnings

import pytest

pytest.importorskip("OpenImageIO")

from projects import make_project  # noqa: E402

from matgen.errors import ConfigError, MatgenWarning, PathError  # noqa: E402


def _load(cfg, **kw):
    from matgen.bake.config import load_config

    return load_config(cfg, **kw)


def _bake(config, out):
    from matgen.export.job import bake

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", MatgenWarning)
        return bake(config, out, jobs=1)


@pytest.fixture
def outside_project(tmp_path):
    """A project whose melanin map lives in a sibling folder 'elsewhere' (outside the config's folder)."""
    cfg = make_project(tmp_path / "proj")
    (tmp_path / "elsewhere").mkdir()
    shutil.move(str(tmp_path / "proj" / "maps" / "melanin.exr"), tmp_path / "elsewhere" / "melanin.exr")
    return cfg


@pytest.mark.parametrize("how", ["dotdot", "absolute", "symlink_dir", "symlink_file", "dotdot_inside"])
def test_map_path_escaping_the_config_folder_is_refused(tmp_path, outside_project, how):
    cfg = outside_project
    proj = cfg.parent
    target = tmp_path / "elsewhere" / "melanin.exr"
    if how == "dotdot":
        ref = "../elsewhere/melanin.exr"
    elif how == "absolute":
        ref = str(target)
    elif how == "symlink_dir":
        os.symlink(tmp_path / "elsewhere", proj / "linked")
        ref = "linked/melanin.exr"
    elif how == "symlink_file":
        os.symlink(target, proj / "maps" / "melanin.exr")
        ref = "maps/melanin.exr"
    else:  # goes out and comes back through the parent's name: still resolves outside
        ref = "maps/../../elsewhere/melanin.exr"
    cfg.write_text(cfg.read_text().replace('"maps/melanin.exr"', json.dumps(ref)))
    with pytest.raises(PathError, match="melanin_fraction"):
        _load(cfg)
    assert not (proj / "out").exists()
    # explicitly allowed, the same config bakes
    result = _bake(_load(cfg, allow_outside=True), proj / "out")
    assert (proj / "out" / "material.json").is_file() and result.files


def test_udim_pattern_outside_is_refused(tmp_path):
    cfg = make_project(tmp_path / "proj", tiles=[1001, 1002])
    text = cfg.read_text().replace('"maps/melanin.<UDIM>.exr"', '"../maps/melanin.<UDIM>.exr"')
    cfg.write_text(text)
    with pytest.raises(PathError, match="melanin_fraction"):
        _load(cfg)


@pytest.mark.parametrize("ref", ["../table.npz", "/tmp/table.npz"])
def test_table_path_outside_is_refused(tmp_path, ref):
    cfg = make_project(tmp_path / "proj")
    cfg.write_text(cfg.read_text().replace('path = "table.npz"', f"path = {json.dumps(ref)}"))
    with pytest.raises(PathError, match="table path"):
        _load(cfg)


def test_path_inside_through_an_inner_symlink_is_accepted(tmp_path):
    """A symbolic link that stays inside the folder is no escape."""
    cfg = make_project(tmp_path / "proj")
    os.symlink(cfg.parent / "maps", cfg.parent / "alias")
    cfg.write_text(cfg.read_text().replace('"maps/melanin.exr"', '"alias/melanin.exr"'))
    _bake(_load(cfg), cfg.parent / "out")


@pytest.mark.parametrize("ref", ["../secret.exr", "/etc/hostname", "link/secret.exr"])
def test_descriptor_texture_outside_is_never_read(tmp_path, ref):
    """inspect_descriptor refuses a texture path leading outside, or reports it missing; never reads it."""
    from matgen.export.descriptor import inspect_descriptor

    cfg = make_project(tmp_path / "proj")
    out = tmp_path / "proj" / "out"
    _bake(_load(cfg), out)
    (tmp_path / "proj" / "secret.exr").write_bytes(b"secret")
    os.symlink(tmp_path / "proj", out / "link")
    desc = out / "material.json"
    doc = json.loads(desc.read_text())
    doc["textures"][0]["path"] = ref
    desc.write_text(json.dumps(doc))
    try:
        rep = inspect_descriptor(desc)
    except (PathError, ConfigError) as exc:  # refusing the whole descriptor (schema pattern) is fine too
        assert "textures" in str(exc) or "texture path" in str(exc)
        return
    assert ref in rep.missing and not rep.ok


def test_resolve_inside_property(tmp_path):
    """Property over many generated relative paths: an accepted path always lies inside the base folder."""
    from hypothesis import given, settings
    from hypothesis import strategies as st

    from matgen.fsutil import resolve_inside

    base = tmp_path / "base"
    (base / "a").mkdir(parents=True)
    os.symlink(tmp_path, base / "up")
    os.symlink(base / "a", base / "side")
    part = st.sampled_from(["a", "b", "..", ".", "up", "side", "x.exr", "", "~", "a b"])

    @settings(max_examples=300, deadline=None, database=None, derandomize=True)
    @given(st.lists(part, min_size=1, max_size=6), st.booleans())
    def check(parts, absolute):
        rel = ("/" if absolute else "") + "/".join(parts)
        try:
            full = resolve_inside(base, rel, "texture path")
        except PathError:
            return
        assert full.is_relative_to(base.resolve()), (rel, full)

    check()


@pytest.mark.parametrize(
    "texture,reader",
    [
        ("rgb/albedo_multiple.exr", "material_panels"),
        ("spectral/albedo_multiple.exr", "texel_spectra"),
        ("qa/qa.exr", "material_panels"),
    ],
)
def test_report_refuses_texture_symlinked_out_of_the_bake_folder(tmp_path, texture, reader):
    """A baked texture replaced by a symbolic link to a copy outside the bake folder (same bytes, so its
    checksum still matches): the report and the preview reader of that texture refuse to follow it
    (PathError naming the texture) and nothing is written; allowed explicitly, the report reads it."""
    from matgen.preview import report

    cfg = make_project(tmp_path / "proj")
    out = tmp_path / "proj" / "out"
    _bake(_load(cfg), out)
    outside = tmp_path / "elsewhere"
    outside.mkdir()
    shutil.move(str(out / texture), outside / "copy.exr")
    os.symlink(outside / "copy.exr", out / texture)
    desc = out / "material.json"
    doc = json.loads(desc.read_text())
    key = next(t["key"] for t in doc["textures"] if t["path"] == texture)
    with pytest.raises(PathError, match=key):
        report.build_report(desc, tmp_path / "report.html")
    assert not (tmp_path / "report.html").exists()
    with pytest.raises(PathError, match=key):
        getattr(report, reader)(desc, doc)
    assert getattr(report, reader)(desc, doc, allow_outside=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", MatgenWarning)
        report.build_report(desc, tmp_path / "report.html", allow_outside=True)
    assert "<img" in (tmp_path / "report.html").read_text()


def test_report_cli_names_the_symlinked_texture_in_one_line(tmp_path, capsys):
    from matgen.cli import main

    cfg = make_project(tmp_path / "proj")
    out = tmp_path / "proj" / "out"
    _bake(_load(cfg), out)
    (tmp_path / "elsewhere").mkdir()
    shutil.move(str(out / "rgb" / "albedo_multiple.exr"), tmp_path / "elsewhere" / "a.exr")
    os.symlink(tmp_path / "elsewhere" / "a.exr", out / "rgb" / "albedo_multiple.exr")
    capsys.readouterr()
    assert main(["report", str(out / "material.json"), "--out", str(tmp_path / "r.html")]) == 2
    err = [ln for ln in capsys.readouterr().err.splitlines() if ln.strip()]
    assert len(err) == 1 and "rgb/albedo_multiple" in err[0] and "outside" in err[0], err
    assert (
        main(["report", str(out / "material.json"), "--out", str(tmp_path / "r.html"), "--allow-outside"])
        == 0
    )
