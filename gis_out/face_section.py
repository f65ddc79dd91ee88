"""The longitudinal section of a drive with its face support window, as a PNG (matplotlib, Agg backend).

Three panels against chainage, sharing it:
1. the section: ground surface, river bed and water, water table, and the tunnel between crown and invert;
2. cover from the surface (the bed in a river) to the crown, with the low-cover limit and low-cover stations shaded;
3. the pressures at the crown: the minimum and maximum support, the band to hold between them (allowing for the
   operating tolerance), the blow-out stress and the Delft fracture pressure, with closed windows marked.

The drive's and the layers' names are drawn literally (no math in "$"); characters the font lacks come as one
warning (`gis_out.png.glyph_check`).
"""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402  (after choosing the backend)
import numpy as np  # noqa: E402

from settle.assessments.face_stations import CAUTION, FaceStations  # noqa: E402
from settle.inputs.route import DriveResult, rounded_cover_m  # noqa: E402

from .png import glyph_checked, save_png  # noqa: E402

GROUND = "#8c6d46"
WATER = "#3b7dd8"
TUNNEL = "#6f6f6f"
MINIMUM = "#1f6fb2"
MAXIMUM = "#c0392b"
BAND = "#7fbf7f"
CLOSED = "#d62728"


def _runs(flag: np.ndarray):
    """(start, stop) index pairs of the runs where flag is set."""
    edges = np.diff(np.concatenate([[0], flag.astype(int), [0]]))
    return list(zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1))


@glyph_checked
def face_section_png(stations: FaceStations, drive: DriveResult, path, layers=(), dpi: int = 130) -> Path:
    """Draw the longitudinal section and pressure window of one drive and write it as a PNG.

    Parameters
    ----------
    stations : FaceStations  The face check of the drive (`settle.face_stations.face_stations`).
    drive : DriveResult      The same drive (its name, chainage range and axis vertices).
    path : str or Path       The PNG to write; its folder must exist. Written to a temporary file, then renamed.
    layers : sequence of settle.model.Layer, optional
                             The ground layers; their boundaries (tops below the first) are drawn where they lie
                             below the surface, named at the left.
    dpi : int                Resolution. [dots per inch]

    Returns
    -------
    Path  The absolute path written.
    """
    fig, (sec, cov, prs) = plt.subplots(3, 1, sharex=True, figsize=(11.0, 8.5),
                                        gridspec_kw={"height_ratios": [3.0, 1.2, 3.0]})
    try:
        _section_panel(sec, stations, drive, layers)
        _cover_panel(cov, stations, drive)
        _pressure_panel(prs, stations, drive)
        fig.text(0.01, 0.005, CAUTION, fontsize=6.5, color="0.3")
        fig.tight_layout(rect=(0, 0.02, 1, 1))
    except BaseException:
        plt.close(fig)
        raise
    return save_png(fig, path, dpi)


def _section_panel(sec, stations: FaceStations, drive: DriveResult, layers) -> None:
    """Panel 1: ground surface, river bed and water, water table, the tunnel and its axis, and the layer tops."""
    c = stations.chainage_m
    sec.plot(c, stations.ground_level_m, color=GROUND, lw=1.5, label="ground surface")
    for a, b in _runs(stations.in_river):
        s = slice(a, b + 1)
        sec.fill_between(c[s], stations.surface_level_m[s], stations.water_level_m[s], color=WATER, alpha=0.35,
                         lw=0, label="river" if a == _runs(stations.in_river)[0][0] else None)
        sec.plot(c[s], stations.surface_level_m[s], color=GROUND, lw=1.5, ls="--")
    dry = np.where(stations.in_river, np.nan, stations.water_level_m)
    sec.plot(c, dry, color=WATER, lw=1.0, ls=":", label="water table")
    sec.fill_between(c, stations.invert_level_m, stations.crown_level_m, color=TUNNEL, alpha=0.5, lw=0,
                     label=f"tunnel, D = {stations.outer_diameter_m:g} m")
    sec.plot(drive.chainage_m, drive.axis_xyz_m[:, 2], color="k", lw=0.6, ls="-.", label="axis")
    for layer in list(layers)[1:]:
        below = np.where(stations.surface_level_m > layer.top_level_m, layer.top_level_m, np.nan)
        sec.plot(c, below, color=GROUND, lw=0.6, alpha=0.7)
        sec.annotate(layer.name, (c[-1], layer.top_level_m), textcoords="offset points", xytext=(-3, 3),
                     fontsize=6.5, color=GROUND, ha="right", parse_math=False)
    sec.set_ylabel("level (m)")
    sec.set_title(f"{stations.drive}: section and face support window", parse_math=False)
    sec.legend(loc="lower left", fontsize=7, ncol=3)
    sec.grid(alpha=0.3)


def _cover_panel(cov, stations: FaceStations, drive: DriveResult) -> None:
    """Panel 2: cover to the crown [m], the low-cover limit and the low-cover stations shaded, and the drive's least
    cover (`DriveResult.min_cover_m`, the value every output shows)."""
    c = stations.chainage_m
    cov.plot(c, stations.cover_m, color="k", lw=1.2, label="cover to crown")
    cov.axhline(stations.low_cover_limit_m, color=CLOSED, lw=0.8, ls="--",
                label=f"low-cover limit {stations.low_cover_limit_m:.2f} m")
    for a, b in _runs(stations.low_cover):
        cov.axvspan(c[a], c[b], color=CLOSED, alpha=0.12, lw=0)
    least, at = rounded_cover_m(drive.min_cover_m), drive.min_cover_chainage_m
    cov.annotate(f"least cover {least:.2f} m", (at, least), textcoords="offset points", xytext=(4, 4), fontsize=7)
    cov.set_ylabel("cover (m)")
    cov.legend(loc="upper right", fontsize=7)
    cov.grid(alpha=0.3)


def _pressure_panel(prs, stations: FaceStations, drive: DriveResult) -> None:
    """Panel 3: the pressures at the crown [kPa] (support band, blow-out, fracture, water) and the closed windows."""
    c = stations.chainage_m
    lo, hi = stations.hold_from_kpa, stations.hold_to_kpa
    prs.fill_between(c, lo, hi, where=hi >= lo, color=BAND, alpha=0.5, lw=0, interpolate=True,
                     label="band to hold (with tolerance)")
    prs.plot(c, stations.support_min_kpa, color=MINIMUM, lw=1.5, label="minimum support")
    prs.plot(c, stations.support_max_kpa, color=MAXIMUM, lw=1.5, label="maximum support")
    prs.plot(c, stations.blowout_kpa, color=MAXIMUM, lw=0.8, ls="--", label="blow-out (total stress)")
    if np.isfinite(stations.fracture_kpa).any():
        prs.plot(c, stations.fracture_kpa, color="purple", lw=0.8, ls=":", label="fracture at the crown (Delft)")
    prs.plot(c, stations.water_pressure_kpa, color=WATER, lw=0.8, label="water pressure")
    closed = stations.status == "closed"
    if closed.any():
        prs.scatter(c[closed], stations.support_min_kpa[closed], color=CLOSED, s=12, zorder=5,
                    label="window closed")
    prs.set_ylabel("pressure at crown (kPa)")
    prs.set_xlabel("chainage (m)")
    prs.legend(loc="upper right", fontsize=7, ncol=2)
    prs.grid(alpha=0.3)
    prs.set_xlim(drive.start_chainage_m, drive.end_chainage_m)
