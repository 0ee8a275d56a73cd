"""Small pipeline fixes: band requests that miss the table say which bands it has; untagged PNGs are quiet."""

import struct
import warnings
import zlib

import numpy as np
import pytest

from matgen.bake.config import load_config
from matgen.bake.map_tags import states_colour_space
from matgen.bake.maps import MapReader, map_info
from matgen.bake.run import plan_bake
from matgen.errors import BandError, ColourSpaceWarning


def test_spectral_band_missing_from_table_names_the_nearest_and_the_table_bands(tmp_path, kit, test_table):
    cfg = kit.make_project(tmp_path / "p", 4, 4)
    cfg.write_text(cfg.read_text().replace('spectral_bands = "400:700:50"', 'spectral_bands = "365,850"'))
    with pytest.raises(BandError) as info:
        plan_bake(load_config(cfg), test_table)
    msg = str(info.value)
    assert "365 nm" in msg and "nearest: 360, 370 nm" in msg
    assert "71 bands 300-1000 nm every 10 nm" in msg


def test_schema_example_band_spec_works_with_a_10_nm_table(tmp_path, kit, test_table):
    """The schema's own example ('360,550,850') is accepted by a table of 10 nm bands."""
    import json
    from importlib import resources

    schema = json.loads(
        resources.files("matgen.bake").joinpath("schema", "material_config.schema.json").read_text()
    )
    text = schema["properties"]["outputs"]["properties"]["spectral_bands"]["description"]
    example = text.split("or '")[1].split("'")[0]
    cfg = kit.make_project(tmp_path / "p", 4, 4)
    cfg.write_text(cfg.read_text().replace('spectral_bands = "400:700:50"', f'spectral_bands = "{example}"'))
    plan = plan_bake(load_config(cfg), test_table)
    assert plan.spectral_bands.centre_nm.tolist() == [360.0, 550.0, 850.0]


def _png(path, pixels, extra_chunks=()):
    """A minimal 8-bit greyscale PNG written here (PNG specification layout), optionally with extra chunks."""

    def chunk(kind, data):
        return (
            struct.pack(">I", len(data))
            + kind
            + data
            + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)
        )

    h, w = pixels.shape
    raw = b"".join(b"\x00" + bytes(row) for row in pixels.astype(np.uint8))
    body = chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, 8, 0, 0, 0, 0))
    body += b"".join(chunk(k, d) for k, d in extra_chunks)
    body += chunk(b"IDAT", zlib.compress(raw)) + chunk(b"IEND", b"")
    path.write_bytes(b"\x89PNG\r\n\x1a\n" + body)
    return path


def test_untagged_png_gives_no_colour_space_warning_but_an_srgb_chunk_does(tmp_path):
    px = np.arange(16, dtype=np.uint8).reshape(4, 4) * 16
    plain = _png(tmp_path / "plain.png", px)
    tagged = _png(tmp_path / "tagged.png", px, [(b"sRGB", b"\x00")])
    assert not states_colour_space(plain) and states_colour_space(tagged)
    with warnings.catch_warnings():
        warnings.simplefilter("error", ColourSpaceWarning)
        reader = MapReader(map_info(plain), 0)
        with reader:
            np.testing.assert_allclose(
                reader.read_rows(0, 4)[..., 0]
                if reader.read_rows(0, 4).ndim == 3
                else reader.read_rows(0, 4),
                px / 255.0,
                atol=1e-6,
            )
    with pytest.warns(ColourSpaceWarning, match="tagged.png"):
        MapReader(map_info(tagged), 0)
