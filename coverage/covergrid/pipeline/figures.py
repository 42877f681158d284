"""The figures of a run: which ones a study asks for, with the study's caption.

:func:`study_caption` states the design, the sensor limits and the span; :func:`write_figures`
draws the metric maps, the ground tracks and the latitude profile of a computed study
(:mod:`covergrid.render`) and saves each atomically (:func:`covergrid.io.save_figure`).
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from covergrid.constants import MU_EARTH_KM3_S2

if TYPE_CHECKING:
    from covergrid.study.build import ResolvedStudy

__all__ = ["TRACK_SAMPLES", "study_caption", "write_figures"]

#: Samples of the ground-track figure (over one orbit of the slowest satellite, at most the span).
TRACK_SAMPLES = 721


def study_caption(study: ResolvedStudy) -> str:
    """Caption of every figure: the design (first group), sensor limits, span and step."""
    from covergrid.render import design_caption

    s = study.sensor
    info: dict[str, Any] = {
        "min_elevation_deg": s.min_elevation_deg,
        "max_off_nadir_deg": s.max_off_nadir_deg,
        "max_range_km": s.max_range_km,
        "duration_h": study.duration_s / 3600.0, "step_s": study.step_s,
        "epoch": study.epoch_iso,
    }
    if study.single_walker:
        t = study.walker
        assert t is not None
        info.update(pattern=t.pattern, total=t.total, planes=t.planes, phasing=t.phasing,
                    altitude_km=t.altitude_km, inclination_deg=t.inclination_deg)
    text = design_caption(info)
    if not study.single_walker:
        n, g = study.n_satellites, study.n_groups
        text = (f"{n} satellite{'s' if n != 1 else ''} in {g} group{'s' if g != 1 else ''}. "
                + text)
    return text


def write_figures(study: ResolvedStudy, ds, folder: Path) -> list[Path]:
    """Metric maps, ground tracks and the latitude profile (see :mod:`covergrid.render`)."""
    from covergrid.render import (
        ground_track,
        plane_numbers,
        save_ground_tracks,
        save_latitude_profile,
        save_metric_maps,
    )

    caption = study_caption(study)
    metrics = list(study.maps.metrics)
    files = save_metric_maps(ds, metrics, folder, caption=caption,
                             projection=study.maps.projection)
    elements = study.elements
    period_s = float(np.max(2 * math.pi * np.sqrt(np.asarray(elements.a_km) ** 3
                                                   / MU_EARTH_KM3_S2)))
    shown_s = min(period_s, study.duration_s)
    t_s = np.linspace(0.0, shown_s, TRACK_SAMPLES)
    lat, lon = ground_track(elements, study.epoch, t_s)
    title = (f"Ground tracks over the first {shown_s / 60:.0f} min"
             + (" (one orbit)" if shown_s < study.duration_s else ""))
    files += save_ground_tracks(lat, lon, folder, caption=caption, title=title,
                                ids=elements.ids, planes=plane_numbers(elements))
    profile = [m for m in metrics if m != "nfold_fraction"][:4] or ["coverage_fraction"]
    files += save_latitude_profile(ds, profile, folder, caption=caption)
    return files
