"""Regenerate the reference map of tests/render/test_render_reference.py.

    .venv/bin/python tests/reference/maps/make_reference.py

Draws ``max_gap`` of :func:`conftest.reference_map_dataset` with :func:`save_metric_maps`
(Robinson, the reference caption) and keeps the PNG as ``max_gap_1deg.png`` beside this
script. Regenerate only on purpose (a deliberate change of the look of maps), and say so in
the commit message; see README.md here.
"""

from __future__ import annotations

import shutil
import sys
import tempfile
from pathlib import Path

import matplotlib

matplotlib.use("Agg")

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))  # tests/, for conftest

from conftest import REFERENCE_MAP_CAPTION, reference_map_dataset  # noqa: E402
from covergrid.render.maps import save_metric_maps  # noqa: E402


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        written = save_metric_maps(reference_map_dataset(), ["max_gap"], tmp,
                                   caption=REFERENCE_MAP_CAPTION)
        png = next(p for p in written if p.suffix == ".png")
        shutil.copyfile(png, HERE / "max_gap_1deg.png")
    print(HERE / "max_gap_1deg.png")


if __name__ == "__main__":
    main()
