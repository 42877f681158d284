"""Report-ready figures: metric maps, ground tracks, latitude profiles, trade charts.

Importing this package is light: matplotlib and cartopy are imported only when a figure is drawn.
Coastlines come from Natural Earth data bundled in ``earth/data`` (see its ATTRIBUTION.md);
nothing is ever downloaded.
"""

from __future__ import annotations

from covergrid.render.maps import (
    PROJECTIONS,
    design_caption,
    get_projection,
    plot_metric_map,
    save_metric_maps,
)
from covergrid.render.profiles import (
    latitude_profile,
    plot_latitude_profile,
    save_latitude_profile,
)
from covergrid.render.style import FOOTER
from covergrid.render.tracks import (
    ground_track,
    plane_numbers,
    plot_ground_tracks,
    save_ground_tracks,
    split_at_antimeridian,
    track_selection,
)
from covergrid.render.trades import (
    pareto_front,
    plot_metric_vs_total,
    plot_minimum_total_map,
    plot_pareto_front,
    save_trade_figures,
)

__all__ = [
    "FOOTER",
    "PROJECTIONS",
    "design_caption",
    "get_projection",
    "ground_track",
    "latitude_profile",
    "pareto_front",
    "plane_numbers",
    "track_selection",
    "plot_ground_tracks",
    "plot_latitude_profile",
    "plot_metric_map",
    "plot_metric_vs_total",
    "plot_minimum_total_map",
    "plot_pareto_front",
    "save_ground_tracks",
    "save_latitude_profile",
    "save_metric_maps",
    "save_trade_figures",
    "split_at_antimeridian",
]
