"""Map gridlines projected once per projection, not at every draw.

cartopy's ``Gridliner`` builds its meridians and parallels anew at every draw, so cartopy's
own cache of projected paths (kept per path object) never finds them, and projecting the 12 to
20 lines of a world map costs about 0.06 s a draw. A map is drawn twice (PNG, then PDF) and a
study draws several maps in one projection, so this was about a quarter of the time of a map.

:func:`gridline_crs` is plate carree whose Matplotlib transform remembers the projected paths
by their vertices (:data:`PROJECTED_PATHS_KEPT` of them), so a line is projected once per
process and projection. The remembered paths are the ones cartopy computes, so the maps look
exactly the same (tests/render/test_render_reference.py).

:func:`place_labels_once` keeps a figure's gridline labels where they were first placed while
it is saved: cartopy places them again at every draw and once more to put the title above
them, four times for a map saved as PNG and PDF: about a sixth of the time of a map.
"""

from __future__ import annotations

import collections
import functools
import sys
from typing import Any

__all__ = ["PROJECTED_PATHS_KEPT", "gridline_crs", "place_labels_once"]

#: Projected gridlines remembered (a world map has 12 to 20; a few projections per process).
PROJECTED_PATHS_KEPT = 512

_projected: collections.OrderedDict[tuple, Any] = collections.OrderedDict()


@functools.cache
def gridline_crs():
    """The coordinate system to give ``GeoAxes.gridlines(crs=...)``: plate carree, remembered.

    Returns
    -------
    cartopy.crs.PlateCarree
        Equal to ``cartopy.crs.PlateCarree()`` (same parameters and limits); only its
        Matplotlib transform differs, by remembering projected paths.
    """
    import cartopy.crs as ccrs
    import cartopy.mpl.geoaxes as geoaxes

    class RememberedTransform(geoaxes.InterProjectionTransform):
        """cartopy's transform between projections, remembering paths by their vertices."""

        def transform_path_non_affine(self, src_path):
            vertices = src_path.vertices
            key = (self.source_projection, self.target_projection, vertices.shape,
                   vertices.tobytes(),
                   None if src_path.codes is None else src_path.codes.tobytes())
            found = _projected.get(key)
            if found is None:
                found = super().transform_path_non_affine(src_path)
                _projected[key] = found
                if len(_projected) > PROJECTED_PATHS_KEPT:
                    _projected.popitem(last=False)
            return found

    class RememberedPlateCarree(ccrs.PlateCarree):
        """Plate carree whose transform onto a map remembers projected paths."""

        def _as_mpl_transform(self, axes=None):  # Matplotlib's protocol for transforms
            if not isinstance(axes, geoaxes.GeoAxes):
                raise ValueError(f"Axes should be an instance of GeoAxes, got {type(axes)}")
            return RememberedTransform(self, axes.projection) + axes.transData

    return RememberedPlateCarree()


def place_labels_once(fig) -> None:
    """Keep the gridline labels of a figure where its next draw places them, for good.

    For a figure whose layout is final, such as one being saved to files: the labels depend
    only on the axes, the projection and the text sizes, so placing them at every draw
    repeats the same work (the PNG and PDF differ only in resolution; their labels agree to
    a micrometre of map coordinates). Uses cartopy's ``Gridliner`` switch ``auto_update``,
    whose keyword argument is deprecated since cartopy 0.23, so the switch is set directly;
    if a later cartopy drops it, the labels are placed at every draw again (slower, the same
    figure).

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        A figure about to be saved; figures without map axes are left as they are.
    """
    if "cartopy" not in sys.modules:  # no map axes can exist; do not import cartopy for none
        return
    from cartopy.mpl.gridliner import Gridliner

    for ax in fig.axes:
        for artist in ax.artists:
            if isinstance(artist, Gridliner):
                artist._auto_update = False
