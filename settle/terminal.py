"""The short table `settle run` prints at the end: the numbers an engineer reads first, and where the files are."""
from __future__ import annotations


def _where(peak: dict) -> str:
    return f"x {peak['x_m']:.1f}, y {peak['y_m']:.1f}"


def summary_table(summary: dict, folder) -> str:
    """Plain-text table from the run's summary (summary.json's dict) and the output folder."""
    rows: list[tuple[str, str]] = []
    peak = summary.get("max_settlement")
    rows.append(("max settlement", f"{peak['settlement_mm']:.1f} mm at {_where(peak)}" if peak else "none"))
    tilt = summary.get("max_tilt")
    if tilt:
        rows.append(("max tilt", f"1/{1 / tilt['tilt']:.0f} at {_where(tilt)}" if tilt["tilt"] > 0 else "0"))
    volume = summary["volume_check"]
    if volume["difference_pct"] is not None:
        rows.append(("volume check", f"trough {volume['surface_trough_volume_m3']:.2f} m3 against "
                                     f"{volume['lost_volume_m3']:.2f} m3 lost ({volume['difference_pct']:+.3f} %)"))
    buildings = summary.get("buildings")
    if buildings:
        counts = ", ".join(f"{c}: {n}" for c, n in buildings["by_category"].items())
        rows.append(("buildings by category", f"{counts} (of {buildings['buildings']}; "
                                              f"{buildings['screened_out_stage_1']} screened out at stage 1)"))
        envelope = buildings.get("envelope")
        if envelope:
            worst = ", ".join(f"{c}: {n}" for c, n in envelope["by_worst_category"].items())
            rows.append(("worst over the sequence", f"{worst} ({envelope['worse_than_stage']} worse than at this "
                                                    "stage)"))
    utilities = summary.get("utilities")
    if utilities:
        counts = ", ".join(f"{s}: {n}" for s, n in utilities["by_status"].items() if n)
        rows.append(("utilities by status", f"{counts} (of {utilities['pipes']})"))
        envelope = utilities.get("envelope")
        if envelope:
            worst = ", ".join(f"{k}: {n}" for k, n in envelope["by_worst_status"].items() if n)
            rows.append(("worst over the sequence", worst))
    probable = summary.get("probabilistic")
    if probable and probable.get("buildings"):
        b = probable["buildings"]
        rows.append(("P(category 2 or worse)", f"above 1 %: {b['prob_category_ge_2_above_1pct']}, above 10 %: "
                     f"{b['prob_category_ge_2_above_10pct']}, above 50 %: {b['prob_category_ge_2_above_50pct']} "
                     f"buildings ({probable['samples']} samples, seed {probable['seed']})"))
    readings = summary.get("readings")
    if readings:
        counts = ", ".join(f"{k}: {v}" for k, v in readings.get("by_trigger_status", {}).items())
        levels = readings.get("trigger_levels_mm") or {}
        rows.append(("monitoring triggers", f"{counts} (of {readings.get('points', 0)} points"
                     + (f"; amber {levels['amber_mm']:g} mm, red {levels['red_mm']:g} mm" if levels else "") + ")"))
    for face in summary.get("face_support", []):
        rows.append(("face support window",
                     f"{face['drive']}: smallest {face['face_min_window_kpa']:.1f} kPa at chainage "
                     f"{face['face_min_window_chainage_m']:.1f} m; {face['face_closed_stations']} closed, "
                     f"{face['face_narrow_stations']} narrow of {face['stations']} stations"
                     + (f"; least cover {face['min_cover_m']:.2f} m" if face.get("min_cover_m") is not None else "")))
    files = summary.get("outputs", {})
    names = [v for v in files.values() if isinstance(v, str)] + [n for k, v in files.items() if isinstance(v, list)
                                                                 and k != "styles" for n in v]
    if files.get("styles"):
        names.append(f"{len(files['styles'])} style files (.qml, .sld)")
    rows.append(("outputs", f"{folder}: " + ", ".join(names)))
    width = max(len(label) for label, _ in rows)
    return "\n".join(f"{label:<{width}}  {text}" for label, text in rows)
