"""A map looks as it did: one PNG map compared pixel by pixel with a reference image.

The reference ``tests/reference/maps/max_gap_1deg.png`` was drawn by the code before the
whole-process speed work (rasterised PDF meshes, one figure saved as PNG and PDF, figures drawn
concurrently); see ``tests/reference/maps/README.md`` for how it was made. It pins the look of
a map, not a computed value: its Dataset is the suite's analytic test Dataset.
"""

from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np
from PIL import Image

from conftest import REFERENCE_MAP_CAPTION, REPO, reference_map_dataset
from covergrid.render import maps, style

REFERENCE_PNG = REPO / "tests" / "reference" / "maps" / "max_gap_1deg.png"

# A pixel counts as changed when one of its channels moved by more than this [0-255 levels]:
# about a tenth of the range, well above the level steps of anti-aliasing differences between
# FreeType or Agg builds, well below any change of colour a reader could see.
VISIBLE_LEVELS = 24
# Share of the 1.7 million pixels allowed to change: 0.2 % (about 3,400 pixels) is a few
# anti-aliased edges of text or coastline moving by one pixel; a changed colour scale, a moved
# colour bar or caption, or a missing coastline changes tens of thousands.
MAX_CHANGED_SHARE = 0.002


def _pixels(path) -> np.ndarray:
    with Image.open(path) as image:
        return np.asarray(image.convert("RGBA"), dtype=np.int16)


def _changed_share(a: np.ndarray, b: np.ndarray) -> float:
    assert a.shape == b.shape, f"image sizes differ: {a.shape} and {b.shape}"
    return float(np.mean(np.abs(a - b).max(axis=-1) > VISIBLE_LEVELS))


def _draw(tmp_path, **kwargs) -> np.ndarray:
    written = maps.save_metric_maps(reference_map_dataset(), ["max_gap"], tmp_path,
                                    caption=REFERENCE_MAP_CAPTION, **kwargs)
    return _pixels(next(p for p in written if p.suffix == ".png"))


def test_the_map_looks_as_the_reference(tmp_path):
    reference = _pixels(REFERENCE_PNG)
    share = _changed_share(_draw(tmp_path), reference)
    assert share <= MAX_CHANGED_SHARE, f"{100 * share:.3f} % of the pixels changed"


def test_the_comparison_sees_a_real_change(tmp_path):
    # The same map in another colour scale must fail the comparison above, by far.
    mesh = maps.plot_metric_map(reference_map_dataset(), "max_gap", cmap="viridis",
                                caption=REFERENCE_MAP_CAPTION)
    fig = mesh.axes.figure
    try:
        png, _ = style.save_png_and_pdf(fig, tmp_path, "recoloured")
    finally:
        plt.close(fig)
    assert _changed_share(_pixels(png), _pixels(REFERENCE_PNG)) > 50 * MAX_CHANGED_SHARE
