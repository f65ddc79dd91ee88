"""Writes the invented demo site's input files (run once; the outputs are committed beside it).

Ostrey, an invented riverside town. A 2.0 m OD water-main tunnel is pipejacked 480 m from the Kiln Yard shaft,
curving left under Tanner's Walk, dipping under the Wenlow Brook, to the Osier Meadow shaft (its design alignment
in LandXML, water_main.xml; the valley's ground as a DEM, valley_dem.tif). A 1.5 m OD cable
tunnel is being driven north from Osier Meadow toward the Rope Street shaft (face at chainage 95 m).
Every name, place and number here is made up for the demo.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np

HERE = Path(__file__).parent
X0, Y0 = 512300.0, 5703400.0  # Kiln Yard shaft, ETRS89 / UTM 32N (EPSG:25832)
BROOK_X = 270.0  # local x of the brook's centre line where it meets the route, m


def ground_level(x, y):
    """Invented ground: falls gently east, with the brook channel (bed 3.1 m below the banks)."""
    general = 31.2 - 0.0025 * x + 0.001 * y
    d = x - (BROOK_X + 0.08 * y)  # the brook runs a little east of north
    channel = 3.1 * np.exp(-((d / 6.5) ** 4))
    return general - channel


def drive_one():
    """The water main set out every 5 m (for placing the other inputs beside it): plan straight 120 m, then a 360 m
    long left-hand curve of radius 420 m; invert levels."""
    s = np.arange(0.0, 480.01, 5.0)
    heading0 = np.radians(MAIN_HEADING_DEG)
    radius = MAIN_RADIUS_M
    x = np.empty_like(s)
    y = np.empty_like(s)
    straight = s <= 120.0
    x[straight] = s[straight] * np.cos(heading0)
    y[straight] = s[straight] * np.sin(heading0)
    xs, ys = 120.0 * np.cos(heading0), 120.0 * np.sin(heading0)
    a = (s[~straight] - 120.0) / radius
    cx, cy = xs - radius * np.sin(heading0), ys + radius * np.cos(heading0)  # centre to the left
    x[~straight] = cx + radius * np.sin(heading0 + a)
    y[~straight] = cy - radius * np.cos(heading0 + a)
    # Invert: the PVIs of the design profile (the vertical curves ease it by a few centimetres; water_main.xml).
    invert = np.interp(s, [p[0] for p in MAIN_PVIS], [p[1] for p in MAIN_PVIS])
    return x, y, invert


# The water main's design alignment, as its designers would issue it: plan and profile as geometry, in LandXML 1.2.
MAIN_HEADING_DEG = 12.0  # the straight out of Kiln Yard, anticlockwise from east
MAIN_STRAIGHT_M = 120.0
MAIN_RADIUS_M = 420.0
MAIN_CURVE_M = 360.0
# Invert profile: (station, invert level) of the PVIs, and the parabolic vertical curve at each (0: none). The drive
# falls from Kiln Yard, sags under the Wenlow Brook and rises to Osier Meadow; 40 m vertical curves ease the grade
# changes, as a jacked pipe string needs.
MAIN_INNER_DIAMETER_M = 1.6
MAIN_PVIS = ((0.0, 24.7, 0.0), (180.0, 23.7, 40.0), (250.0, 22.6, 40.0), (330.0, 22.6, 40.0), (480.0, 24.2, 0.0))


def write_landxml():
    """water_main.xml: a line and a left-hand circular curve in plan, PVIs with parabolic vertical curves for the
    invert. LandXML writes points as "northing easting"."""
    h = np.radians(MAIN_HEADING_DEG)
    start = np.array([0.0, 0.0])
    pc = start + MAIN_STRAIGHT_M * np.array([np.cos(h), np.sin(h)])
    centre = pc + MAIN_RADIUS_M * np.array([-np.sin(h), np.cos(h)])
    a = MAIN_CURVE_M / MAIN_RADIUS_M
    end = centre + MAIN_RADIUS_M * np.array([np.sin(h + a), -np.cos(h + a)])

    def ne(p):
        return f"{Y0 + p[1]:.4f} {X0 + p[0]:.4f}"

    pvis = "".join(f'<ParaCurve length="{length:g}">{st:g} {z:.3f}</ParaCurve>' if length else
                   f"<PVI>{st:g} {z:.3f}</PVI>" for st, z, length in MAIN_PVIS)
    length = MAIN_STRAIGHT_M + MAIN_CURVE_M
    text = f"""<?xml version="1.0" encoding="UTF-8"?>
<!-- Ostrey (an invented town): the water main's design alignment. Invented for the settle demo. -->
<LandXML xmlns="http://www.landxml.org/schema/LandXML-1.2" version="1.2">
 <Units><Metric linearUnit="meter" areaUnit="squareMeter" volumeUnit="cubicMeter" angularUnit="radians"/></Units>
 <Alignments name="Ostrey drives">
  <Alignment name="Kiln Yard to Osier Meadow" length="{length:g}" staStart="0">
   <CoordGeom>
    <Line staStart="0" length="{MAIN_STRAIGHT_M:g}"><Start>{ne(start)}</Start><End>{ne(pc)}</End></Line>
    <Curve staStart="{MAIN_STRAIGHT_M:g}" rot="ccw" radius="{MAIN_RADIUS_M:g}" length="{MAIN_CURVE_M:g}">
     <Start>{ne(pc)}</Start><Center>{ne(centre)}</Center><End>{ne(end)}</End></Curve>
   </CoordGeom>
   <Profile><ProfAlign name="invert design">{pvis}</ProfAlign></Profile>
  </Alignment>
 </Alignments>
</LandXML>
"""
    (HERE / "water_main.xml").write_text(text)


# The valley's DEM: 2 m cells over the survey's area, levels of the invented ground at the cell centres.
DEM_CELL_M = 2.0
DEM_WEST, DEM_EAST, DEM_SOUTH, DEM_NORTH = -40.0, 540.0, -80.0, 460.0  # local metres from Kiln Yard


def write_dem():
    """valley_dem.tif: a single-band GeoTIFF (Float32, EPSG:25832, deflate) of `ground_level`."""
    import rasterio
    from rasterio.transform import Affine

    cols = int((DEM_EAST - DEM_WEST) / DEM_CELL_M)
    rows = int((DEM_NORTH - DEM_SOUTH) / DEM_CELL_M)
    cx = DEM_WEST + (np.arange(cols) + 0.5) * DEM_CELL_M
    cy = DEM_NORTH - (np.arange(rows) + 0.5) * DEM_CELL_M
    levels = ground_level(*np.meshgrid(cx, cy)).astype("float32")
    transform = Affine(DEM_CELL_M, 0.0, X0 + DEM_WEST, 0.0, -DEM_CELL_M, Y0 + DEM_NORTH)  # north-up, 2 m cells
    with rasterio.open(HERE / "valley_dem.tif", "w", driver="GTiff", width=cols, height=rows, count=1,
                       dtype="float32", crs="EPSG:25832", nodata=-9999.0, compress="deflate",
                       transform=transform) as dem:
        dem.write(levels, 1)


def main():
    # Ground surface survey: a 10 m grid with 2 m spacing across the brook channel.
    gx = np.arange(-40.0, 540.0, 10.0)
    gy = np.arange(-80.0, 460.0, 10.0)
    xx, yy = np.meshgrid(gx, gy)
    fine_x = np.arange(BROOK_X - 30, BROOK_X + 70, 2.0)
    fx, fy = np.meshgrid(fine_x, np.arange(-80.0, 460.0, 5.0))
    px = np.concatenate([xx.ravel(), fx.ravel()])
    py = np.concatenate([yy.ravel(), fy.ravel()])
    keep = np.unique(np.round(np.column_stack([px, py]), 3), axis=0, return_index=True)[1]
    px, py = px[np.sort(keep)], py[np.sort(keep)]
    with open(HERE / "ground_survey.csv", "w") as f:
        f.write("x,y,z\n")
        for a, b in zip(px, py):
            f.write(f"{X0 + a:.2f},{Y0 + b:.2f},{ground_level(a, b):.3f}\n")

    write_dem()
    x, y, invert = drive_one()
    write_landxml()

    # Cable tunnel: from Osier Meadow shaft heading north-north-west, depth of axis below ground as Z.
    sx, sy = x[-1] + 6.0, y[-1] + 4.0
    t = np.linspace(0.0, 150.0, 7)
    heading = np.radians(100.0)
    cx, cy = sx + t * np.cos(heading), sy + t * np.sin(heading)
    depth = np.interp(t, [0.0, 150.0], [6.0, 5.4])
    feature = {
        "type": "Feature",
        "properties": {"name": "Rope Street cable tunnel"},
        "geometry": {
            "type": "LineString",
            "coordinates": [[round(X0 + a, 3), round(Y0 + b, 3), round(d, 3)] for a, b, d in zip(cx, cy, depth)],
        },
    }
    collection = {
        "type": "FeatureCollection",
        "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::25832"}},
        "features": [feature],
    }
    (HERE / "cable_tunnel.geojson").write_text(json.dumps(collection, indent=1) + "\n")

    # Places to report, set out from the routes: (id, route vertices, chainage, offset to the left, depth).
    main_xy = np.column_stack([x, y])
    cable_xy = np.column_stack([cx, cy])
    crossing = 290.0  # about where the water main passes under the brook
    rows = [
        ("TW-01", main_xy, 120.0, -8.0, 0.0),  # Tanner's Walk, house fronts and kerbs across the route
        ("TW-02", main_xy, 120.0, -4.0, 0.0),
        ("TW-03", main_xy, 120.0, 0.0, 0.0),
        ("TW-04", main_xy, 120.0, 4.0, 0.0),
        ("TW-05", main_xy, 120.0, 8.0, 0.0),
        ("GAS-1", main_xy, 116.0, 0.0, 1.2),  # a gas main under the street, at its own depth
        ("GAS-2", main_xy, 116.0, 5.0, 1.2),
        ("FB-W", main_xy, crossing - 14.0, 6.0, 0.0),  # footbridge abutments beside the crossing
        ("FB-E", main_xy, crossing + 14.0, 6.0, 0.0),
        ("RS-01", cable_xy, 60.0, 0.0, 0.0),  # cable tunnel: behind the face, and above it
        ("RS-02", cable_xy, 95.0, 0.0, 0.0),
        ("RS-03", cable_xy, 120.0, 0.0, 0.0),  # ahead of the face
    ]
    with open(HERE / "report_points.csv", "w") as f:
        f.write("id,x,y,depth_m\n")
        for pid, route, ch, off, d in rows:
            px, py = _set_out(route, ch, off)
            f.write(f"{pid},{X0 + px:.2f},{Y0 + py:.2f},{d}\n")
    write_utilities(main_xy, cable_xy)
    write_buildings(main_xy, cable_xy)
    write_readings(cable_xy)


def _line_across(route, chainage, half_length, angle_deg, n=21):
    """Points of a straight line through the route at `chainage`, turned `angle_deg` from the route's direction."""
    x0, y0 = _set_out(route, chainage, 0.0)
    x1, y1 = _set_out(route, chainage + 1.0, 0.0)
    heading = np.arctan2(y1 - y0, x1 - x0) + np.radians(angle_deg)
    t = np.linspace(-half_length, half_length, n)
    return np.column_stack([x0 + t * np.cos(heading), y0 + t * np.sin(heading)])


def _line_along(route, ch_from, ch_to, offset, step=5.0):
    """Points of a line following the route at a constant offset to its left."""
    return np.array([_set_out(route, c, offset) for c in np.arange(ch_from, ch_to + 1e-9, step)])


def write_utilities(main_xy, cable_xy):
    """Invented buried services near the two drives, as a GeoJSON line layer with documented attributes."""
    pipes = [
        # id, material, OD mm, depth to axis m, pipe length m (None: continuous), line, extra attributes
        ("CI-TW-1", "cast_iron", 325.0, 1.1, 3.66, _line_across(main_xy, 118.0, 40.0, 80.0),
         {"allowable_joint_opening_mm": 5.0}),  # old cast-iron water main under Tanner's Walk
        ("PE-TW-2", "pe", 180.0, 0.9, None, _line_along(main_xy, 130.0, 230.0, 3.0), {}),  # gas main alongside
        ("VC-S-3", "vitrified_clay", 225.0, 2.3, 1.5, _line_across(main_xy, 205.0, 30.0, 55.0),
         {"allowable_bending_strain_ue": 200.0, "allowable_axial_strain_ue": 200.0,
          "allowable_joint_opening_mm": 10.0}),  # sewer; the owner's limits (invented for the demo)
        ("DI-OM-4", "ductile_iron", 250.0, 1.3, 5.5, _line_across(main_xy, 410.0, 30.0, 95.0),
         {"allowable_joint_opening_mm": 15.0}),
        ("ST-RS-5", "steel", 406.0, 1.6, None, _line_across(cable_xy, 112.0, 30.0, 70.0), {}),  # ahead of the face
        ("CI-RS-6", "cast_iron", 250.0, 1.0, 3.66, _line_across(cable_xy, 128.0, 25.0, 85.0),
         {"allowable_joint_opening_mm": 5.0}),
    ]
    features = []
    for pid, material, od, depth, length, line, extra in pipes:
        props = {"id": pid, "material": material, "outer_diameter_mm": od, "depth_m": depth,
                 "segment_length_m": length, **extra}
        features.append({"type": "Feature", "properties": props, "geometry": {
            "type": "LineString", "coordinates": [[round(X0 + a, 3), round(Y0 + b, 3)] for a, b in line]}})
    collection = {"type": "FeatureCollection",
                  "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::25832"}},
                  "features": features}
    (HERE / "utilities.geojson").write_text(json.dumps(collection, indent=1) + "\n")


def _rectangle(cx, cy, along, across, heading):
    """Corners of a rectangle centred at (cx, cy), `along` metres in the direction `heading` (rad)."""
    c, s = np.cos(heading), np.sin(heading)
    u = np.array([[-0.5, -0.5], [0.5, -0.5], [0.5, 0.5], [-0.5, 0.5]]) * [along, across]
    return [[cx + a * c - b * s, cy + a * s + b * c] for a, b in u]


def write_buildings(main_xy, cable_xy):
    """Invented buildings: two terraces facing each other along Tanner's Walk, where it crosses the water main, and
    a few detached buildings of other sizes and orientations near the brook and the cable tunnel."""
    rng = np.random.default_rng(20261201)  # fixed: the demo is the same every time
    x0, y0 = _set_out(main_xy, 120.0, 0.0)
    x1, y1 = _set_out(main_xy, 121.0, 0.0)
    street = np.arctan2(y1 - y0, x1 - x0) + np.radians(80.0)  # the street's direction
    normal = street + np.pi / 2
    features = []
    for side in (-1, 1):
        for k, t in enumerate(np.arange(-42.0, 43.0, 8.0)):
            depth = rng.uniform(9.0, 12.0)
            cx = x0 + t * np.cos(street) + side * (4.5 + depth / 2) * np.cos(normal)
            cy = y0 + t * np.sin(street) + side * (4.5 + depth / 2) * np.sin(normal)
            number = 2 * k + (1 if side < 0 else 2)
            features.append((f"TW {number}", _rectangle(cx, cy, 7.6, depth, street),
                             {"height_m": round(float(rng.uniform(6.5, 10.0)), 1), "structure": "masonry",
                              "foundation_depth_m": 0.9, "use": "terraced house"}))
    others = [
        ("Old Mill", main_xy, 275.0, -14.0, 24.0, 12.0, 35.0, 11.0, "masonry", 1.2, "offices"),
        ("Brook Lodge", main_xy, 318.0, 9.0, 10.0, 8.0, -20.0, 6.0, "masonry", 0.8, "house"),
        ("Meadow Depot", main_xy, 200.0, 6.0, 30.0, 15.0, 0.0, 7.5, "frame", 1.5, "warehouse"),
        ("Kiln Yard Store", main_xy, 30.0, -7.0, 12.0, 9.0, 60.0, 5.0, "masonry", 0.7, "store"),
        ("Rope Street Hall", cable_xy, 118.0, 4.0, 18.0, 11.0, 15.0, 9.0, "frame", 1.0, "hall"),
        ("Rope Street 2", cable_xy, 136.0, -3.0, 8.0, 10.0, 90.0, 8.0, "masonry", 0.8, "house"),
        ("Ferry Cottage", main_xy, 380.0, 40.0, 9.0, 7.0, 10.0, 6.0, None, None, "house"),
    ]
    for name, route, ch, off, along, across, turn, height, structure, foundation, use in others:
        cx, cy = _set_out(route, ch, off)
        xa, ya = _set_out(route, ch + 1.0, off)
        heading = np.arctan2(ya - cy, xa - cx) + np.radians(turn)
        props = {"height_m": height, "use": use}
        if structure:
            props["structure"] = structure
        if foundation is not None:
            props["foundation_depth_m"] = foundation
        features.append((name, _rectangle(cx, cy, along, across, heading), props))
    collection = {"type": "FeatureCollection",
                  "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::25832"}},
                  "features": [{"type": "Feature", "properties": {"id": name, **props}, "geometry": {
                      "type": "Polygon",
                      "coordinates": [[[round(X0 + a, 3), round(Y0 + b, 3)] for a, b in ring + ring[:1]]]}}
                      for name, ring, props in features]}
    (HERE / "buildings.geojson").write_text(json.dumps(collection, indent=1) + "\n")


def write_readings(cable_xy):
    """Invented monitoring of the cable tunnel under construction: two arrays of surface points across it, read each
    day as the face advanced 5 m a day to chainage 95 m. The readings are made with the engine from a "true" volume
    loss of 1.2 % and K of 0.42 (the design says 0.8 % and the layers' K), plus 0.3 mm of levelling noise and two
    misread staff readings, so that `settle fit` has something to find. Synthetic data for the demo only."""
    import sys

    sys.path.insert(0, str(HERE.parent))
    from settle.monitoring.fitting import drive_with_values, predicted_settlement_mm
    from settle.inputs.project_file import load_project
    from settle.inputs.readings import Readings

    project = load_project(HERE / "ostrey.toml")
    index = [d.name for d in project.drives].index("Osier Meadow to Rope Street cable tunnel")
    truth = replace_drive(project, index, drive_with_values(project.drives[index], {None: (1.2, 0.42)}))
    rng = np.random.default_rng(1201)
    places = [(f"CT{ch:.0f}-{'L' if off > 0 else 'R' if off < 0 else 'C'}{abs(off):.0f}", *_set_out(cable_xy, ch, off))
              for ch in (30.0, 60.0) for off in (-9.0, -6.0, -3.0, 0.0, 3.0, 6.0, 9.0)]
    rows = []
    start = np.datetime64("2026-11-02T07:30:00")
    for day, face in enumerate(np.arange(10.0, 95.01, 5.0)):
        n = len(places)
        where = Readings(point_id=np.array([p[0] for p in places], dtype=object),
                         x_m=X0 + np.array([p[1] for p in places]), y_m=Y0 + np.array([p[2] for p in places]),
                         depth_m=np.zeros(n), date=np.full(n, start + np.timedelta64(day, "D")),
                         settlement_mm=np.zeros(n), face_chainage_m=np.full(n, face), drive=np.full(n, index),
                         line=np.zeros(n, dtype=int), drive_names=tuple(d.name for d in project.drives))
        true_mm = predicted_settlement_mm(truth, where)
        read = true_mm + rng.normal(0.0, 0.3, n)
        for k, (pid, px, py) in enumerate(places):
            rows.append((pid, X0 + px, Y0 + py, str(start + np.timedelta64(day, "D")) + "Z", read[k], face))
    rows[150] = rows[150][:4] + (rows[150][4] + 10.0,) + rows[150][5:]  # a misread staff: 10 mm off
    rows[201] = rows[201][:4] + (rows[201][4] - 8.0,) + rows[201][5:]
    with open(HERE / "cable_tunnel_readings.csv", "w") as f:
        f.write("point_id,drive,x,y,date,settlement_mm,face_chainage_m\n")
        for pid, px, py, date, value, face in rows:
            f.write(f"{pid},Osier Meadow to Rope Street cable tunnel,{px:.2f},{py:.2f},{date},{value:.2f},{face:.1f}\n")


def replace_drive(project, index, drive):
    from dataclasses import replace

    drives = list(project.drives)
    drives[index] = drive
    return replace(project, drives=tuple(drives))


def _set_out(xy, chainage, offset):
    """Plan position at a chainage along a polyline and an offset to its left (plan chainage)."""
    seg = np.diff(xy, axis=0)
    s = np.concatenate([[0.0], np.cumsum(np.hypot(seg[:, 0], seg[:, 1]))])
    k = min(np.searchsorted(s, chainage, side="right") - 1, len(seg) - 1)
    t = seg[k] / np.hypot(*seg[k])
    p = xy[k] + t * (chainage - s[k])
    return p[0] - t[1] * offset, p[1] + t[0] * offset


if __name__ == "__main__":
    main()
