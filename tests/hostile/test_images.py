"""Hostile pigment maps: truncated, zero-sized, huge declared sizes, wrong channel counts, NaN/inf texels.

Each case runs a real bake (material config + table + maps made by tests/hostile/projects.py) and checks that
it ends in one MatgenError naming the map, that nothing is written to the output folder, and that a huge
declared size is refused before memory for it is allocated (tracemalloc peak, which numpy reports to).
The whole-image readers of the export and preview stages (read_exr, read_texture) get the same checks.
File-format facts used to forge headers: OpenEXR attribute layout name\\0type\\0size(int32) value
(dataWindow is a box2i of four int32: xmin, ymin, xmax, ymax; OpenEXR file layout documentation);
PNG IHDR = length, b"IHDR", width, height (big-endian uint32) ..., CRC-32 over type and data (PNG spec,
W3C 2003, sec. 11.2.2); TIFF tag 256 ImageWidth, 257 ImageLength (TIFF 6.0, sec. 8).
"""

import struct
import tracemalloc
import warnings
import zlib

import numpy as np
import pytest

pytest.importorskip("OpenImageIO")

from projects import make_project, write_map  # noqa: E402

from matgen.errors import ImageError, LimitError, MatgenError, MatgenWarning  # noqa: E402


def _bake(cfg, out):
    from matgen.bake.config import load_config
    from matgen.export.job import bake

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", MatgenWarning)
        return bake(load_config(cfg), out, jobs=1)


@pytest.fixture(scope="module", autouse=True)
def _warm(tmp_path_factory):
    """One valid bake first, so imports and kernel compilation do not count in the allocation peaks below."""
    root = tmp_path_factory.mktemp("warm")
    _bake(make_project(root), root / "out")


def _expect_refusal(cfg, out, exc_type=MatgenError, match=None, max_peak_bytes=64e6):
    tracemalloc.start()
    try:
        with pytest.raises(exc_type, match=match) as info:
            _bake(cfg, out)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < max_peak_bytes, f"{peak / 1e6:.0f} MB allocated while refusing the map"
    leftovers = sorted(p.name for p in out.rglob("*")) if out.exists() else []
    assert not [n for n in leftovers if not n.startswith(".matgen")], f"output written: {leftovers}"
    return info.value


def _patch_exr_window(data: bytes, xmax: int, ymax: int) -> bytes:
    buf = bytearray(data)
    for name in (b"dataWindow\x00box2i\x00", b"displayWindow\x00box2i\x00"):
        at = buf.index(name) + len(name) + 4
        xmin, ymin, _, _ = struct.unpack_from("<iiii", buf, at)
        struct.pack_into("<iiii", buf, at, xmin, ymin, xmax, ymax)
    return bytes(buf)


def _patch_png_size(data: bytes, width: int, height: int) -> bytes:
    buf = bytearray(data)
    at = buf.index(b"IHDR")
    struct.pack_into(">II", buf, at + 4, width, height)
    struct.pack_into(">I", buf, at + 17, zlib.crc32(bytes(buf[at : at + 17])) & 0xFFFFFFFF)
    return bytes(buf)


def _patch_tiff_size(data: bytes, width: int, height: int) -> bytes:
    buf = bytearray(data)
    assert buf[:2] == b"II", "OpenImageIO writes little-endian TIFF here"
    ifd = struct.unpack_from("<I", buf, 4)[0]
    n = struct.unpack_from("<H", buf, ifd)[0]
    for i in range(n):
        at = ifd + 2 + 12 * i
        tag, typ, count = struct.unpack_from("<HHI", buf, at)
        if tag in (256, 257):
            value = width if tag == 256 else height
            if typ == 3:
                struct.pack_into("<HHIH", buf, at, tag, 4, count, 0)  # widen SHORT to LONG
            struct.pack_into("<HHII", buf, at, tag, 4, count, value)
    return bytes(buf)


@pytest.mark.parametrize("side", [100_000, 2_000_000_000])
def test_exr_declaring_huge_dimensions_is_refused_before_allocation(tmp_path, side):
    cfg = make_project(tmp_path)
    m = tmp_path / "maps" / "melanin.exr"
    m.write_bytes(_patch_exr_window(m.read_bytes(), side - 1, side - 1))
    _expect_refusal(cfg, tmp_path / "out", MatgenError, match="melanin")


def test_png_declaring_huge_dimensions_is_refused_before_allocation(tmp_path):
    cfg = make_project(tmp_path)
    m = tmp_path / "maps" / "blood.png"
    m.write_bytes(_patch_png_size(m.read_bytes(), 60_000, 60_000))
    _expect_refusal(cfg, tmp_path / "out", MatgenError, match="blood")


def test_tiff_declaring_huge_dimensions_is_refused_before_allocation(tmp_path):
    cfg = make_project(tmp_path)
    text = cfg.read_text().replace("maps/melanin.exr", "maps/melanin.tif")
    cfg.write_text(text)
    from projects import pigment_maps

    write_map(tmp_path / "maps" / "melanin.tif", pigment_maps(16, 16)[0])
    m = tmp_path / "maps" / "melanin.tif"
    m.write_bytes(_patch_tiff_size(m.read_bytes(), 70_000, 70_000))
    _expect_refusal(cfg, tmp_path / "out", MatgenError, match="melanin")


def test_huge_dimensions_within_a_lowered_ceiling_are_a_limit_error(tmp_path, monkeypatch):
    """A 16 x 16 map against MATGEN_MAX_IMAGE_PIXELS=100: LimitError naming the variable."""
    cfg = make_project(tmp_path)
    monkeypatch.setenv("MATGEN_MAX_IMAGE_PIXELS", "100")
    _expect_refusal(cfg, tmp_path / "out", LimitError, match="MATGEN_MAX_IMAGE_PIXELS")


@pytest.mark.parametrize("name", ["melanin.exr", "blood.png"])
def test_zero_byte_map_is_image_error(tmp_path, name):
    cfg = make_project(tmp_path)
    (tmp_path / "maps" / name).write_bytes(b"")
    _expect_refusal(cfg, tmp_path / "out", ImageError, match=name.split(".")[0])


@pytest.mark.parametrize("name", ["melanin.exr", "blood.png"])
@pytest.mark.parametrize("keep", [0.3, 0.6, 0.9])
def test_truncated_map_is_image_error(tmp_path, name, keep):
    cfg = make_project(tmp_path, h=64, w=64)
    m = tmp_path / "maps" / name
    data = m.read_bytes()
    m.write_bytes(data[: int(len(data) * keep)])
    _expect_refusal(cfg, tmp_path / "out", ImageError, match=name.split(".")[0])


def test_channel_beyond_the_map_is_image_error(tmp_path):
    cfg = make_project(tmp_path)
    text = cfg.read_text().replace('map = "maps/melanin.exr"', 'map = "maps/melanin.exr"\nchannel = 3')
    cfg.write_text(text)
    _expect_refusal(cfg, tmp_path / "out", ImageError, match="channel")


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_non_finite_texels_are_refused_with_their_position(tmp_path, bad):
    """A NaN/inf texel at (x=5, y=3) must not be clamped silently: ImageError naming the texel."""
    cfg = make_project(tmp_path)
    from projects import pigment_maps

    mel = pigment_maps(16, 16)[0].astype(np.float32)
    mel[3, 5] = bad
    write_map(tmp_path / "maps" / "melanin.exr", mel)
    err = _expect_refusal(cfg, tmp_path / "out", ImageError, match="melanin")
    assert "5" in str(err) and "3" in str(err)


def test_many_channel_map_with_lowered_channel_ceiling(tmp_path):
    """Channel ceiling: reading 1 channel of a 40-channel map passes by default, not under a ceiling of 8."""
    cfg = make_project(tmp_path)
    from projects import pigment_maps

    mel = np.repeat(pigment_maps(16, 16)[0][:, :, None], 40, axis=2)
    write_map(tmp_path / "maps" / "melanin.exr", mel)
    _bake(cfg, tmp_path / "ok")
    from matgen import limits

    with limits.override(image_channels=8):
        _expect_refusal(cfg, tmp_path / "out", LimitError, match="channel")


# ---------------------------------------------------------------------------------------------------------
# whole-image readers outside the bake: matgen.export.exr.read_exr (tests, inspection) and
# matgen.preview.images.read_texture (report, previews, gallery)


def _readers():
    from matgen.export.exr import read_exr
    from matgen.preview.images import read_texture

    return {"read_exr": read_exr, "read_texture": read_texture}


def _small_exr(tmp_path):
    from projects import pigment_maps

    p = tmp_path / "tex.exr"
    write_map(p, pigment_maps(16, 16)[0])
    return p


@pytest.mark.parametrize("reader", ["read_exr", "read_texture"])
def test_whole_image_readers_check_the_ceilings_before_reading(tmp_path, reader):
    """A 16 x 16 EXR reads by default and is a LimitError naming the file under image_pixels=100."""
    from matgen import limits

    p = _small_exr(tmp_path)
    read = _readers()[reader]
    assert read(p)[0].shape[:2] == (16, 16)
    with limits.override(image_pixels=100):
        with pytest.raises(LimitError, match="tex.exr"):
            read(p)
    with limits.override(image_channels=1):
        assert read(p)[0].shape[2] == 1
    write_map(p, np.zeros((4, 4, 3), np.float32))
    with limits.override(image_channels=2):
        with pytest.raises(LimitError, match="MATGEN_MAX_IMAGE_CHANNELS"):
            read(p)


@pytest.mark.parametrize("reader", ["read_exr", "read_texture"])
@pytest.mark.parametrize("side", [30_000, 2_000_000_000])
def test_whole_image_readers_refuse_huge_declared_dimensions_before_allocation(tmp_path, reader, side):
    p = _small_exr(tmp_path)
    p.write_bytes(_patch_exr_window(p.read_bytes(), side - 1, side - 1))
    read = _readers()[reader]
    tracemalloc.start()
    try:
        with pytest.raises(MatgenError, match="tex.exr"):
            read(p)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 64e6, f"{peak / 1e6:.0f} MB allocated while refusing the image"


@pytest.mark.parametrize("reader", ["read_exr", "read_texture"])
def test_whole_image_readers_turn_non_utf8_error_text_into_image_error(tmp_path, reader):
    """The EXR whose 'chlist' type reads b'ch\\xc9ist': OpenImageIO's error text is not UTF-8."""
    p = _small_exr(tmp_path)
    data = p.read_bytes()
    assert data.count(b"chlist") == 1
    p.write_bytes(data.replace(b"chlist", b"ch\xc9ist"))
    with pytest.raises(ImageError, match="tex.exr"):
        _readers()[reader](p)
