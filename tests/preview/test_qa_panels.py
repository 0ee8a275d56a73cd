"""QA flag panels: the count of flagged texels in the title, and every flagged texel visible in the PNG."""

import numpy as np
import OpenImageIO as oiio

from matgen.preview import plots


def _ring_pixels(path):
    """Pixels of the ring colour (#ffd000) in the PNG, read back by OpenImageIO."""
    inp = oiio.ImageInput.open(str(path))
    px = inp.read_image(oiio.UINT8)
    inp.close()
    rgb = px[..., :3].astype(int)
    return int(np.count_nonzero((rgb[..., 0] > 230) & (abs(rgb[..., 1] - 208) < 30) & (rgb[..., 2] < 60)))


def test_a_few_flagged_texels_are_counted_and_drawn(tmp_path):
    flags = np.zeros((400, 400))
    flags[17, 33] = flags[200, 380] = flags[399, 0] = 1.0  # 3 of 160000 texels: under 1 %
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots()
    title = plots._flag_panel(fig, ax, {"title": "QA: table_clamped", "values": flags})
    plt.close(fig)
    assert title == "QA: table_clamped: 3 of 160000 texels flagged (0.0019 %)"
    assert "all 0" not in title
    png = plots.plot_contact_sheet(tmp_path / "qa.png", [{"title": "QA", "values": flags, "flags": True}])
    assert _ring_pixels(png) > 0
    none = plots.plot_contact_sheet(
        tmp_path / "none.png", [{"title": "QA", "values": np.zeros((400, 400)), "flags": True}]
    )
    assert _ring_pixels(none) == 0
