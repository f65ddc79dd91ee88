"""LandXML 1.2 alignments: plan geometry against closed forms, profiles against closed forms, the 5 mm chord rule, and
an InputError naming the file, element and station for every mistake.

Closed forms used as outside values (each test names its own):
- circle: a point at arc length l from the start lies at angle l / R about the centre (geometry).
- clothoid: x = A sqrt(pi) C(t), y = A sqrt(pi) S(t), A^2 = R L, t = l / (A sqrt(pi)), with the Fresnel integrals
  C, S of scipy.special.fresnel (Abramowitz & Stegun 7.3.1-7.3.2; the standard clothoid of road design).
- equal-tangent parabola: z = z_start + g1 x + (g2 - g1) x^2 / (2 L) (common practice in road design).
- circular vertical curve: the circle of radius R tangent to both grades (geometry).
LandXML itself: the LandXML 1.2 schema documentation (landxml.org/schema/LandXML-1.2/documentation): points are
"north east [elev]" text, rot is "cw" | "ccw", an infinite spiral radius is "INF", <ProfAlign> holds PVI /
ParaCurve / CircCurve with "station elevation" text.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import fresnel

from settle.errors import InputError
from settle.inputs import landxml
from settle.inputs.landxml import (CHORD_TOLERANCE_M, ProfilePiece, clothoid_points, profile_levels,
                                   read_alignment_landxml, read_landxml_route)

NS = "http://www.landxml.org/schema/LandXML-1.2"
METRIC = '<Metric linearUnit="meter" areaUnit="squareMeter" volumeUnit="cubicMeter" angularUnit="radians"/>'
E0, N0 = 530_000.0, 180_000.0  # a start point with the size of projected coordinates [m]


# ------------------------------------------------------------------------------------------- closed forms (tests)
def circle_point(centre, radius, start_angle, sense, arc):
    """Point at arc length `arc` from the start of a circle (centre, radius), turning ccw (+1) or cw (-1)."""
    angle = start_angle + sense * np.asarray(arc, float) / radius
    return np.column_stack([centre[0] + radius * np.cos(angle), centre[1] + radius * np.sin(angle)])


def fresnel_path(start, heading, k0, k1, length, at):
    """Points of a path whose curvature runs linearly from k0 to k1, from the Fresnel integrals.

    The standard clothoid with curvature c t (t from its origin) is x = A sqrt(pi) C(t / (A sqrt(pi))),
    y = sign(c) A sqrt(pi) S(t / (A sqrt(pi))), A^2 = 1 / |c|; a piece from curvature k0 starts at t0 = k0 / c and is
    turned so that its heading there is `heading`.
    """
    at = np.asarray(at, float)
    c = (k1 - k0) / length
    scale = math.sqrt(math.pi / abs(c))  # A sqrt(pi)

    def base(t):
        s, cc = fresnel(np.asarray(t) / scale)  # scipy returns (S, C)
        return np.column_stack([scale * cc, math.copysign(1.0, c) * scale * s])

    t0 = k0 / c
    turn = heading - c * t0 * t0 / 2.0
    rot = np.array([[math.cos(turn), -math.sin(turn)], [math.sin(turn), math.cos(turn)]])
    return np.asarray(start, float) + (base(t0 + at) - base(np.array([t0]))) @ rot.T


def tangent_crossing(p, heading_p, q, heading_q):
    """Where the line through p with heading_p meets the line through q with heading_q (the PI)."""
    u = np.array([math.cos(heading_p), math.sin(heading_p)])
    w = np.array([math.cos(heading_q), math.sin(heading_q)])
    a, _ = np.linalg.solve(np.column_stack([u, -w]), np.asarray(q, float) - np.asarray(p, float))
    return np.asarray(p, float) + a * u


# ------------------------------------------------------------------------------------------- LandXML text
def ne(xy) -> str:
    """LandXML point text: "northing easting" (schema PointType)."""
    return f"{xy[1]:.9f} {xy[0]:.9f}"


def line(start, end, **attrs) -> str:
    return f"<Line{_attrs(attrs)}><Start>{ne(start)}</Start><End>{ne(end)}</End></Line>"


def curve(start, centre, end, rot, length, radius=None, **attrs) -> str:
    extra = {"radius": f"{radius:.9f}"} if radius is not None else {}
    return (f'<Curve rot="{rot}" length="{length:.9f}"{_attrs({**extra, **attrs})}><Start>{ne(start)}</Start>'
            f"<Center>{ne(centre)}</Center><End>{ne(end)}</End></Curve>")


def spiral(start, pi, end, rot, length, r_start, r_end, spi_type="clothoid") -> str:
    def radius(r):
        return "INF" if math.isinf(r) else f"{r:.9f}"
    return (f'<Spiral rot="{rot}" length="{length:.9f}" radiusStart="{radius(r_start)}" '
            f'radiusEnd="{radius(r_end)}" spiType="{spi_type}"><Start>{ne(start)}</Start><PI>{ne(pi)}</PI>'
            f"<End>{ne(end)}</End></Spiral>")


def _attrs(attrs) -> str:
    return "".join(f' {k}="{v}"' for k, v in attrs.items())


def pvis(*rows, name="design") -> str:
    """<Profile><ProfAlign> from (station, level) or (station, level, tag, attrs) rows."""
    body = ""
    for row in rows:
        tag, attrs = (row[2], row[3]) if len(row) > 2 else ("PVI", {})
        body += f"<{tag}{_attrs(attrs)}>{row[0]} {row[1]}</{tag}>"
    return f'<Profile><ProfAlign name="{name}">{body}</ProfAlign></Profile>'


def alignment(geometry: str, profile: str, name="D1", sta_start=100.0, extra="") -> str:
    return (f'<Alignment name="{name}" staStart="{sta_start}"{extra}><CoordGeom>{geometry}</CoordGeom>'
            f"{profile}</Alignment>")


def document(*alignments: str, units=METRIC, namespace=NS, head="") -> str:
    xmlns = f' xmlns="{namespace}"' if namespace else ""
    return (f'<?xml version="1.0" encoding="UTF-8"?>{head}<LandXML{xmlns} version="1.2"><Units>{units}</Units>'
            f"<Alignments>{''.join(alignments)}</Alignments></LandXML>")


def write(tmp_path, text, name="route.xml"):
    path = tmp_path / name
    path.write_bytes(text.encode("utf-8") if isinstance(text, str) else text)
    return path


STRAIGHT = line((E0, N0), (E0 + 100.0, N0))  # 100 m due east, stations 100 to 200
FLAT = pvis((100, 10.0), (200, 9.0))  # 1 % fall


def simple(tmp_path, geometry=STRAIGHT, profile=FLAT, **kw):
    return write(tmp_path, document(alignment(geometry, profile, **kw)))


def departures(route, true_xy, true_level, stations):
    """Largest plan distance from the true points to the polyline, and largest level difference from the levels
    interpolated between vertices, at the given stations. [m]"""
    plan = shapely.distance(shapely.linestrings(route.xy), shapely.points(true_xy)).max()
    level = np.abs(np.interp(stations, route.station_m, route.level_m) - true_level).max()
    return plan, level


# ------------------------------------------------------------------------------------------- plan geometry
def test_a_line_gives_its_two_ends_and_the_start_station(tmp_path):
    alignment_, sta_start = read_alignment_landxml(simple(tmp_path), z_means="invert")
    np.testing.assert_allclose(alignment_.xy, [[E0, N0], [E0 + 100.0, N0]])  # north east text -> (x=E, y=N)
    np.testing.assert_allclose(alignment_.v, [10.0, 9.0])
    assert sta_start == 100.0 and alignment_.vertical == "invert"
    assert alignment_.source.endswith('route.xml <Alignment> "D1"')


def test_northing_easting_order_is_read_as_x_easting_y_northing(tmp_path):
    # LandXML 1.2 schema, PointType: text "north east [elev]". A line running due north.
    text = document(alignment(f"<Line><Start>{N0} {E0} 3.0</Start><End>{N0 + 50} {E0}</End></Line>",
                              pvis((100, 1.0), (150, 1.0))))
    route = read_landxml_route(write(tmp_path, text))
    np.testing.assert_allclose(route.xy, [[E0, N0], [E0, N0 + 50.0]])


@pytest.mark.parametrize("rot, sense", [("ccw", 1.0), ("cw", -1.0)])
def test_arc_vertices_lie_on_the_circle_at_their_stations(tmp_path, rot, sense):
    # Closed form of a circle: centre, radius R, angle l / R from the start (geometry).
    radius, arc = 150.0, 120.0
    centre = np.array([E0 + 40.0, N0 + sense * radius])  # the arc leaves (E0 + 40, N0) heading east
    start_angle = -sense * math.pi / 2.0
    end = circle_point(centre, radius, start_angle, sense, [arc])[0]
    heading_end = sense * arc / radius
    after = end + 30.0 * np.array([math.cos(heading_end), math.sin(heading_end)])
    geometry = (line((E0, N0), (E0 + 40.0, N0)) + curve((E0 + 40.0, N0), centre, end, rot, arc, radius)
                + line(end, after))
    route = read_landxml_route(simple(tmp_path, geometry, pvis((100, 5.0), (290, 5.0))))
    on_arc = (route.station_m >= 140.0) & (route.station_m <= 260.0)
    assert on_arc.sum() >= 3
    expected = circle_point(centre, radius, start_angle, sense, route.station_m[on_arc] - 140.0)
    np.testing.assert_allclose(route.xy[on_arc], expected, atol=1e-6)
    np.testing.assert_allclose(route.xy[-1], after, atol=1e-6)
    # the chord rule: departure of the polyline from a dense circle, at most 5 mm and not far below it
    dense = np.linspace(0.0, arc, 4001)
    plan, _ = departures(route, circle_point(centre, radius, start_angle, sense, dense), 5.0, 140.0 + dense)
    assert 0.8 * CHORD_TOLERANCE_M < plan <= CHORD_TOLERANCE_M
    # not wasteful: steps of sqrt(8 R tol) along the arc (sagitta c^2 / 8R), plus the line ends
    assert on_arc.sum() - 1 == math.ceil(arc / math.sqrt(8.0 * radius * CHORD_TOLERANCE_M))
    assert len(route.xy) == on_arc.sum() + 2


@pytest.mark.parametrize("sense", [1.0, -1.0])
def test_entry_spiral_against_the_fresnel_integrals(sense):
    # x = A sqrt(pi) C(t), y = A sqrt(pi) S(t), A^2 = R L, t = l / (A sqrt(pi)) (Fresnel integrals, scipy).
    radius, length = 200.0, 60.0
    scale = math.sqrt(radius * length * math.pi)
    l = np.linspace(0.0, length, 13)
    s, c = fresnel(l / scale)
    expected = np.column_stack([scale * c, sense * scale * s])
    got = clothoid_points([0.0, 0.0], 0.0, 0.0, sense / radius, length, l)
    np.testing.assert_allclose(got, expected, atol=1e-9)


@pytest.mark.parametrize("sense", [1.0, -1.0])
def test_exit_and_partial_spirals_against_the_fresnel_integrals(sense):
    # Exit spiral (R to INF) and partial spiral (R1 to R2) as pieces of the standard clothoid (Fresnel integrals).
    l = np.linspace(0.0, 45.0, 10)
    for k0, k1 in ((sense / 250.0, 0.0), (sense / 400.0, sense / 180.0), (sense / 180.0, sense / 400.0)):
        got = clothoid_points([E0, N0], 0.7, k0, k1, 45.0, l)
        np.testing.assert_allclose(got, fresnel_path([E0, N0], 0.7, k0, k1, 45.0, l), atol=1e-6)


def spiral_alignment(sense, radius=180.0, spiral_in=50.0, arc=80.0, spiral_out=40.0, partial_to=None):
    """Line - entry spiral - arc - exit spiral (or partial spiral to `partial_to` and an arc) - line, built from
    the Fresnel integrals and the circle. Returns (geometry text, true-point function of plan distance, length)."""
    pieces = [(50.0, 0.0, 0.0), (spiral_in, 0.0, sense / radius), (arc, sense / radius, sense / radius)]
    if partial_to is None:
        pieces += [(spiral_out, sense / radius, 0.0), (30.0, 0.0, 0.0)]
    else:
        pieces += [(spiral_out, sense / radius, sense / partial_to), (25.0, sense / partial_to, sense / partial_to)]
    start, heading, text, spans = np.array([E0, N0]), 0.3, "", []
    for length, k0, k1 in pieces:
        if k0 == k1 == 0.0:
            def at(l, p=start, h=heading):
                return p + np.outer(l, [math.cos(h), math.sin(h)])
        elif k0 == k1:
            centre = start + np.array([-math.sin(heading), math.cos(heading)]) / k0
            turning = math.copysign(1.0, k0)

            def at(l, c=centre, r=1.0 / abs(k0), a=heading - turning * math.pi / 2, s=turning):
                return circle_point(c, r, a, s, l)
        else:
            def at(l, p=start, h=heading, a=k0, b=k1, n=length):
                return fresnel_path(p, h, a, b, n, l)
        end = at(np.array([length]))[0]
        end_heading = heading + length * (k0 + k1) / 2.0
        rot = "ccw" if sense > 0 else "cw"
        if k0 == k1 == 0.0:
            text += line(start, end)
        elif k0 == k1:
            text += curve(start, centre, end, rot, length, 1.0 / abs(k0))
        else:
            text += spiral(start, tangent_crossing(start, heading, end, end_heading), end, rot, length,
                           1.0 / abs(k0) if k0 else math.inf, 1.0 / abs(k1) if k1 else math.inf)
        spans.append((sum(s[1] for s in spans), length, at))
        start, heading = end, end_heading

    def truth(l):
        l = np.atleast_1d(np.asarray(l, float))
        out = np.empty((len(l), 2))
        for offset, length, at in spans:
            inside = (l >= offset - 1e-6) & (l <= offset + length + 1e-6)
            out[inside] = at(l[inside] - offset)
        return out
    return text, truth, sum(p[0] for p in pieces)


@pytest.mark.parametrize("sense", [1.0, -1.0])
@pytest.mark.parametrize("partial_to", [None, 120.0])
def test_spiral_alignment_vertices_lie_on_the_true_curve_within_the_chord_rule(tmp_path, sense, partial_to):
    geometry, truth, total = spiral_alignment(sense, partial_to=partial_to)
    route = read_landxml_route(simple(tmp_path, geometry, pvis((100, 5.0), (100 + total, 4.0))))
    np.testing.assert_allclose(route.station_m[[0, -1]], [100.0, 100.0 + total])
    np.testing.assert_allclose(route.xy, truth(route.station_m - 100.0), atol=1e-6)  # every vertex on the curve
    dense = np.linspace(0.0, total, 20001)
    plan, level = departures(route, truth(dense), 5.0 - dense / total, 100.0 + dense)
    assert 0.8 * CHORD_TOLERANCE_M < plan <= CHORD_TOLERANCE_M
    assert level < 1e-9  # one straight grade


def test_a_spiral_of_equal_radii_is_an_arc_and_inf_to_inf_a_line(tmp_path):
    # A <Spiral> with radiusStart = radiusEnd (seen in published files) has constant curvature: a circle.
    got = clothoid_points([0.0, 0.0], 0.0, 1 / 100.0, 1 / 100.0, 50.0, [50.0])[0]
    np.testing.assert_allclose(got, circle_point([0.0, 100.0], 100.0, -math.pi / 2, 1.0, [50.0])[0], atol=1e-9)
    text = spiral((E0, N0), (E0 + 20, N0), (E0 + 40, N0), "cw", 40.0, math.inf, math.inf)
    route = read_landxml_route(simple(tmp_path, text, pvis((100, 5.0), (140, 5.0))))
    assert len(route.xy) == 2


def test_a_published_example_reads_and_matches_its_own_elevations(tmp_path):
    # From a LandXML road-alignment example published in a surveying program's help pages
    # (http://www.3d-system.net/help/65/eng/conv/road/landxml.htm), its first three elements and its profile;
    # alignment length set to the sum of those elements. Its arc ends at its <End> (radius 50 m, ccw, length
    # 21.552792 m), its CircCurve lengths are the arcs of radius 1000 m between the grades (one given as -1000 for
    # the crest), and the elevations in its 3-D <Start>/<End> points are the profile's levels there.
    text = f"""<?xml version="1.0" encoding="UTF-8"?>
<LandXML xmlns="{NS}" version="1.2"><Units><Metric areaUnit="squareMeter" linearUnit="meter"
 volumeUnit="cubicMeter" angularUnit="grads" directionUnit="grads"/></Units>
<Alignments name="Test"><Alignment name="test_road" length="90.650263" staStart="0.000000" state="existing">
<CoordGeom>
<Line dir="93.643074" length="47.455499" staStart="0.000000">
<Start>6697099.299000 3444138.672000 8.704000</Start><End>6697104.029768 3444185.891109 7.756666</End></Line>
<Curve rot="ccw" chord="21.386317" dirEnd="66.201206" dirStart="93.643074" length="21.552792" radius="50.000000"
 staStart="47.455499"><Start>6697104.029768 3444185.891109 7.756666</Start>
<Center>6697153.780703 3444180.906683 7.541541</Center><End>6697110.663374 3444206.222607 7.326416</End></Curve>
<Line dir="66.201206" length="21.641972" staStart="69.008291">
<Start>6697110.663374 3444206.222607 7.326416</Start><End>6697121.621104 3444224.885487 6.894386</End></Line>
</CoordGeom>
<Profile staStart="0.000000"><ProfAlign name="test_road">
<PVI>0.000000 8.704000</PVI><PVI>156.339651 5.583056</PVI>
<CircCurve length="99.929380" radius="1000.000000">206.336000 4.585000</CircCurve>
<PVI>256.182497 8.579716</PVI><PVI>300.962830 12.168428</PVI>
<CircCurve length="102.248221" radius="-1000.000000">351.968000 16.256000</CircCurve>
<PVI>403.124000 15.116118</PVI><PVI>455.996000 13.938000</PVI>
</ProfAlign></Profile></Alignment></Alignments></LandXML>"""
    route = read_landxml_route(write(tmp_path, text))
    joints = np.searchsorted(route.station_m, [0.0, 47.455499, 69.008291, 90.650263 - 1e-6])
    np.testing.assert_allclose(route.station_m[joints], [0.0, 47.455499, 69.008291, 90.650263], atol=1e-6)
    np.testing.assert_allclose(route.xy[joints], [[3444138.672, 6697099.299], [3444185.891109, 6697104.029768],
                                                  [3444206.222607, 6697110.663374],
                                                  [3444224.885487, 6697121.621104]], atol=1e-5)
    np.testing.assert_allclose(route.level_m[joints], [8.704, 7.756666, 7.326416, 6.894386], atol=1e-5)


def test_points_may_be_given_by_reference_to_cgpoints(tmp_path):
    text = document(alignment('<Line><Start pntRef="A"/><End pntRef="B"/></Line>', FLAT)).replace(
        "<Units>", f'<CgPoints><CgPoint name="A">{N0} {E0}</CgPoint><CgPoint name="B">{N0} {E0 + 100}</CgPoint>'
                   "</CgPoints><Units>")
    route = read_landxml_route(write(tmp_path, text))
    np.testing.assert_allclose(route.xy, [[E0, N0], [E0 + 100.0, N0]])


@pytest.mark.parametrize("namespace", ["http://www.landxml.org/schema/LandXML-1.1", ""])
def test_landxml_1_1_and_no_namespace_are_read_alike(tmp_path, namespace):
    route = read_landxml_route(write(tmp_path, document(alignment(STRAIGHT, FLAT), namespace=namespace)))
    assert len(route.xy) == 2 and route.warnings == ()


def test_another_namespace_is_read_with_a_warning(tmp_path):
    route = read_landxml_route(write(tmp_path, document(alignment(STRAIGHT, FLAT), namespace="urn:other")))
    assert 'namespace "urn:other" is not LandXML 1.2' in route.warnings[0]


def test_a_windows_1252_file_is_read_and_an_alignment_chosen_by_name(tmp_path):
    text = document(alignment(STRAIGHT, FLAT, name="Tunnel \u00e9"), alignment(STRAIGHT, FLAT, name="Other"))
    text = text.replace('encoding="UTF-8"', 'encoding="Windows-1252"')
    route = read_landxml_route(write(tmp_path, text.encode("cp1252")), name="Tunnel \u00e9")
    assert route.source.endswith('<Alignment> "Tunnel \u00e9"')


# ------------------------------------------------------------------------------------------- profile
def test_parabolic_vertical_curve_levels_against_the_closed_form(tmp_path):
    # z = z_start + g1 x + (g2 - g1) x^2 / (2 L), x from the start of the curve (equal-tangent parabola).
    g1, g2, length = -0.02, 0.015, 120.0
    profile = pvis((100, 10.0), (200, 10.0 + 100 * g1, "ParaCurve", {"length": length}), (300, 8.0 + 100 * g2))
    route = read_landxml_route(simple(tmp_path, line((E0, N0), (E0 + 200.0, N0)), profile))
    start, z_start = 200.0 - length / 2, 10.0 + g1 * (100.0 - length / 2)

    def truth(s):
        x = np.clip(s - start, 0.0, length)
        return np.where(s < start, 10.0 + g1 * (s - 100.0), z_start + g1 * x + (g2 - g1) * x * x / (2 * length)
                        + np.where(s > start + length, g2 * (s - start - length), 0.0))
    np.testing.assert_allclose(route.level_m, truth(route.station_m), atol=1e-9)
    dense = np.linspace(100.0, 300.0, 20001)
    _, level = departures(route, np.column_stack([E0 + dense - 100.0, np.full_like(dense, N0)]), truth(dense),
                          dense)
    assert 0.8 * CHORD_TOLERANCE_M < level <= CHORD_TOLERANCE_M
    inside = (route.station_m > start) & (route.station_m < start + length)
    # not wasteful: |z''| = |g2 - g1| / L, steps of sqrt(8 tol / |z''|)
    assert inside.sum() + 1 == math.ceil(length / math.sqrt(8 * CHORD_TOLERANCE_M * length / abs(g2 - g1)))
    assert len(route.xy) == inside.sum() + 4  # the ends of the line and of the curve


@pytest.mark.parametrize("g1, g2", [(-0.03, 0.02), (0.025, -0.01)])
def test_circular_vertical_curve_levels_lie_on_the_circle_tangent_to_both_grades(tmp_path, g1, g2):
    # The centre is R from both grade lines, on the concave side (geometry), found here as the solution of
    # n_i . (c - PVI) = R for the unit normals n_i of the two grades, not by the reader's tangent-point route.
    radius, pvi = 2500.0, np.array([200.0, 10.0])
    side = 1.0 if g2 > g1 else -1.0
    normals = np.array([[-g, 1.0] for g in (g1, g2)]) / np.hypot([g1, g2], 1.0)[:, None] * side
    centre = pvi + np.linalg.solve(normals, [radius, radius])
    arc = radius * abs(math.atan(g2) - math.atan(g1))
    profile = pvis((100, 10.0 - 100 * g1), (200, 10.0, "CircCurve", {"length": f"{arc:.6f}",
                                                                     "radius": radius}), (300, 10.0 + 100 * g2))
    route = read_landxml_route(simple(tmp_path, line((E0, N0), (E0 + 200.0, N0)), profile))
    s, z = route.station_m, route.level_m
    on_circle = np.abs(np.hypot(s - centre[0], z - centre[1]) - radius) < 1e-6
    on_grades = np.isclose(z, np.where(s < 200, 10.0 + g1 * (s - 200), 10.0 + g2 * (s - 200)), atol=1e-9)
    assert np.all(on_circle | on_grades) and on_circle.sum() >= 5
    grade_line = np.where(s < 200, 10.0 + g1 * (s - 200), 10.0 + g2 * (s - 200))
    assert np.all(side * (z - grade_line) >= -1e-9)  # a sag lies above its grades, a crest below
    dense = np.linspace(100.0, 300.0, 20001)
    lower = np.sqrt(np.maximum(radius ** 2 - (dense - centre[0]) ** 2, 0.0))
    circle = centre[1] - side * lower
    tangent_station = centre[0] + np.array([-1, 1]) * radius * np.abs(np.sin([math.atan(g1), math.atan(g2)]))
    truth = np.where((dense > tangent_station.min()) & (dense < tangent_station.max()), circle,
                     np.where(dense < 200, 10.0 + g1 * (dense - 200), 10.0 + g2 * (dense - 200)))
    _, level = departures(route, np.column_stack([E0 + dense - 100, np.full_like(dense, N0)]), truth, dense)
    assert level <= CHORD_TOLERANCE_M


def test_profile_levels_run_the_end_grades_on():
    pieces = [ProfilePiece("grade", 0.0, 10.0, z0_m=1.0, g1=0.1), ProfilePiece("grade", 10.0, 20.0, z0_m=2.0, g1=-0.1)]
    np.testing.assert_allclose(profile_levels(pieces, [-5.0, 5.0, 15.0, 30.0]), [0.5, 1.5, 1.5, 0.0])


def test_chainage_differs_from_the_plan_station_by_the_slope_and_a_warning_says_so(tmp_path):
    # 300 m at a 5 % grade: the axis is 300 (sqrt(1 + 0.05^2) - 1) = 0.375 m longer than its plan length.
    route = read_landxml_route(simple(tmp_path, line((E0, N0), (E0 + 300.0, N0)), pvis((100, 20.0), (400, 5.0))))
    assert "0.375 m more than the plan station 400.000" in route.warnings[0]
    quiet = read_landxml_route(simple(tmp_path, line((E0, N0), (E0 + 300.0, N0)), pvis((100, 20.0), (400, 17.0))))
    assert quiet.warnings == ()  # 1 %: 15 mm over 300 m


# ------------------------------------------------------------------------------------------- property test
@settings(max_examples=40, deadline=None)
@given(radius=st.floats(20.0, 3000.0), deflection_deg=st.floats(1.0, 150.0), ccw=st.booleans(),
       before=st.floats(1.0, 200.0), after=st.floats(1.0, 200.0), heading=st.floats(-math.pi, math.pi),
       grade=st.floats(-0.05, 0.05))
def test_random_line_arc_line_ends_where_the_circle_says_and_keeps_the_chord_rule(
        tmp_path_factory, radius, deflection_deg, ccw, before, after, heading, grade):
    sense = 1.0 if ccw else -1.0
    arc = radius * math.radians(deflection_deg)
    u = np.array([math.cos(heading), math.sin(heading)])
    p1 = np.array([E0, N0]) + before * u
    centre = p1 + sense * radius * np.array([-u[1], u[0]])
    start_angle = heading - sense * math.pi / 2
    p2 = circle_point(centre, radius, start_angle, sense, [arc])[0]
    h2 = heading + sense * arc / radius
    p3 = p2 + after * np.array([math.cos(h2), math.sin(h2)])
    geometry = (line((E0, N0), p1) + curve(p1, centre, p2, "ccw" if ccw else "cw", arc, radius) + line(p2, p3))
    total = before + arc + after
    path = write(tmp_path_factory.mktemp("lx"), document(alignment(
        geometry, pvis((100, 5.0), (100 + total, 5.0 + grade * total)))))
    route = read_landxml_route(path)
    np.testing.assert_allclose(route.xy[-1], p3, atol=1e-6)
    assert route.station_m[-1] == pytest.approx(100.0 + total, abs=1e-6)
    assert np.all(np.diff(route.station_m) > 0)
    dense = np.linspace(0.0, arc, 3001)
    plan, _ = departures(route, circle_point(centre, radius, start_angle, sense, dense), 0.0, 100 + before + dense)
    assert plan <= CHORD_TOLERANCE_M


# ------------------------------------------------------------------------------------------- mistakes
ARC_START, ARC_R, ARC_L = (E0 + 50.0, N0), 100.0, 60.0
ARC_CENTRE = (E0 + 50.0, N0 + ARC_R)
ARC_END = tuple(circle_point(ARC_CENTRE, ARC_R, -math.pi / 2, 1.0, [ARC_L])[0])
BASE_GEOMETRY = line((E0, N0), ARC_START) + curve(ARC_START, ARC_CENTRE, ARC_END, "ccw", ARC_L, ARC_R)
BASE_PROFILE = pvis((100, 10.0), (210, 9.0))
BASE = document(alignment(BASE_GEOMETRY, BASE_PROFILE))
ELEMENT_2 = r'route\.xml <Alignment> "D1" <CoordGeom> element 2 <{}> at station 150\.000: '


def edit(old: str, new: str, text: str = BASE) -> str:
    assert old in text, old
    return text.replace(old, new, 1)


MISTAKES = [
    ("empty", "  \n", r"route\.xml: the file is empty"),
    ("bad xml", BASE[:-20], r"route\.xml: not valid XML: .* at line 1, column \d+"),
    ("doctype", edit("<LandXML", '<!DOCTYPE x [<!ENTITY e "aaaa">]><LandXML'),
     r"route\.xml: holds a document type declaration"),
    ("root", '<?xml version="1.0"?><Other/>', r"route\.xml: the root element is <Other>, not <LandXML>"),
    ("no units", edit(f"<Units>{METRIC}</Units>", ""), r"route\.xml: no <Units>"),
    ("imperial", edit(METRIC, '<Imperial linearUnit="USSurveyFoot"/>'),
     r"route\.xml <Units>: <Imperial> units; settle reads metres only"),
    ("feet", edit('linearUnit="meter"', 'linearUnit="foot"'),
     r'route\.xml <Units><Metric>: linearUnit must be "meter" \(settle reads metres only\); got "foot"'),
    ("mm", edit('linearUnit="meter"', 'linearUnit="millimeter"'), r'linearUnit must be "meter" .* got "millimeter"'),
    ("elevation unit", edit('linearUnit="meter"', 'linearUnit="meter" elevationUnit="feet"'),
     r'elevationUnit must be "meter" .* got "feet"'),
    ("no alignment", document(), r"route\.xml: no <Alignments><Alignment> in the file"),
    ("two, no name", document(alignment(STRAIGHT, FLAT, name="A"), alignment(STRAIGHT, FLAT, name="B")),
     r'route\.xml: holds 2 alignments; choose one with alignment_name \(its name attribute\); names found: "A", '
     r'"B"'),
    ("station equation", edit("<CoordGeom>", '<StaEquation staAhead="5" staInternal="150"/><CoordGeom>'),
     r'"D1": station equations \(<StaEquation>\) are not supported'),
    ("no staStart", edit(' staStart="100.0"', ""), r'"D1": missing attribute staStart'),
    ("chain", edit("</CoordGeom>", "<Chain>1 2 3</Chain></CoordGeom>"),
     r'<CoordGeom> element 3 <Chain> at station 210\.000: not supported; settle reads <Line>, <Curve> and '
     r"<Spiral> \(clothoid\)"),
    ("irregular", edit("<Curve", "<IrregularLine><Start>1 2</Start></IrregularLine><Curve"),
     ELEMENT_2.format("IrregularLine") + "not supported"),
    ("cubic spiral", edit("</CoordGeom>", spiral(ARC_END, ARC_END, ARC_END, "cw", 10.0, 100.0, math.inf,
                                                  "cubic") + "</CoordGeom>"),
     r'element 3 <Spiral> at station 210\.000: spiType "cubic"; settle reads clothoid spirals only'),
    ("no spiType", edit("</CoordGeom>", spiral(ARC_END, ARC_END, ARC_END, "cw", 10.0, 100.0, math.inf).replace(
        ' spiType="clothoid"', "") + "</CoordGeom>"), r"element 3 <Spiral> at station 210\.000: no spiType"),
    ("spiral radius 0", edit("</CoordGeom>", spiral(ARC_END, ARC_END, ARC_END, "cw", 10.0, 0.0, math.inf)
                             + "</CoordGeom>"),
     r'attribute radiusStart must be a number more than 0 and at most 10000000 m or "INF"; got "0\.000000000"'),
    ("nan length", edit(f'length="{ARC_L:.9f}"', 'length="NaN"'),
     ELEMENT_2.format("Curve") + r'attribute length must be a number more than 0 and at most 10000000 m; '
                                 r'got "NaN"'),
    ("inf length", edit(f'length="{ARC_L:.9f}"', 'length="INF"'), r'attribute length .* got "INF"'),
    ("huge radius", edit(f'radius="{ARC_R:.9f}"', 'radius="1e308"'),
     ELEMENT_2.format("Curve") + r'attribute radius must be a number more than 0 .* got "1e308"'),
    ("negative length", edit(f'length="{ARC_L:.9f}"', 'length="-60"'), r'attribute length .* got "-60"'),
    ("negative radius", edit(f'radius="{ARC_R:.9f}"', 'radius="-100"'), r'attribute radius .* got "-100"'),
    ("text length", edit(f'length="{ARC_L:.9f}"', 'length="sixty"'), r'attribute length .* got "sixty"'),
    ("no rot", edit('rot="ccw" ', ""),
     ELEMENT_2.format("Curve") + r'attribute rot must be "cw" or "ccw"; the attribute is missing'),
    ("bad rot", edit('rot="ccw"', 'rot="left"'), r'attribute rot must be "cw" or "ccw"; got "left"'),
    ("no end", edit(f"<End>{ne(ARC_END)}</End>", ""), ELEMENT_2.format("Curve") + "missing <End>"),
    ("bad point", edit(f"<Start>{ne((E0, N0))}</Start>", "<Start>north east</Start>"),
     r'element 1 <Line> at station 100\.000: <Start> must hold "northing easting \[elevation\]" as numbers; '
     r'got "north east"'),
    ("nan point", edit(f"<Start>{ne((E0, N0))}</Start>", "<Start>nan 5</Start>"), r'got "nan 5"'),
    ("huge point", edit(f"<Start>{ne((E0, N0))}</Start>", "<Start>1e308 5</Start>"),
     r"<Start> northing and easting must be from -10000000 to 10000000 m; got 1e\+308 5"),
    ("end missed", edit(f'length="{ARC_L:.9f}"', f'length="{ARC_L + 0.5:.9f}"'),
     ELEMENT_2.format("Curve") + r"the end computed from its <Start>, start direction, radii and length "
                                 r"60\.500 m lies 50\d mm from its <End> \(more than 10 mm\)"),
    ("wrong rot", edit('rot="ccw"', 'rot="cw"'), r"lies \d+ mm from its <End>"),
    ("radius vs centre", edit(f'radius="{ARC_R:.9f}"', 'radius="100.5"'),
     r"radius 100\.5 m but <Center> lies 100\.000 m from <Start>"),
    ("gap", edit(f"<Start>{ne(ARC_START)}</Start>", f"<Start>{ne((ARC_START[0], ARC_START[1] + 0.05))}</Start>"),
     ELEMENT_2.format("Curve") + r"its <Start> lies 50 mm from the <End> of element 1 <Line>; the elements must "
                                 "join"),
    ("element station", edit('<Curve rot="ccw"', '<Curve staStart="130" rot="ccw"'),
     ELEMENT_2.format("Curve") + r"staStart is 130\.000 but the elements before it end at station 150\.000"),
    ("alignment length", edit('staStart="100.0"', 'staStart="100.0" length="120"'),
     r'"D1": length is 120\.000 m but its elements add up to 110\.000 m'),
    ("no profile", edit(BASE_PROFILE, ""), r'"D1": no design profile \(<Profile><ProfAlign>\)'),
    ("two profiles", edit(BASE_PROFILE, BASE_PROFILE + pvis((100, 1), (210, 1), name="other")),
     r'holds 2 design profiles \(<ProfAlign>\); choose one with alignment_profile; names found: "design", "other"'),
    ("unsym", edit("<PVI>210 9.0</PVI>", '<UnsymParaCurve lengthIn="5" lengthOut="8">150 9.5</UnsymParaCurve>'
                                         "<PVI>210 9.0</PVI>"),
     r'"D1" <ProfAlign> "design" <UnsymParaCurve> after station 100\.000: not supported'),
    ("one pvi", edit("<PVI>210 9.0</PVI>", ""), r'<ProfAlign> "design": 1 PVI\(s\); a profile needs at least 2'),
    ("pvi order", edit("<PVI>210 9.0</PVI>", "<PVI>90 9.0</PVI>"),
     r"<PVI> at station 90\.000: stations must increase along the profile; the one before is at station 100\.000"),
    ("pvi text", edit("<PVI>210 9.0</PVI>", "<PVI>210</PVI>"),
     r'<PVI> after station 100\.000: <PVI> must hold "station elevation" as numbers; got "210"'),
    ("huge level", edit("<PVI>210 9.0</PVI>", "<PVI>210 1e308</PVI>"),
     r"<PVI> at station 210\.000: station must be .* and elevation from -10000 to 10000 m; got 210 1e\+308"),
    ("short profile", edit("<PVI>210 9.0</PVI>", "<PVI>200 9.0</PVI>"),
     r'<ProfAlign> "design": covers stations 100\.000 to 200\.000 but the alignment runs from 100\.000 to '
     r"210\.000"),
    ("curve at the end", edit("<PVI>210 9.0</PVI>", '<ParaCurve length="10">210 9.0</ParaCurve>'),
     r"<ParaCurve> at station 210\.000: a vertical curve at the last PVI"),
    ("curve too long", edit("<PVI>210 9.0</PVI>", '<ParaCurve length="120">150 9.0</ParaCurve><PVI>210 9.0</PVI>'),
     r"<ParaCurve> at station 150\.000: the vertical curve starts at station 90\.000, before the PVI before it "
     r"\(station 100\.000\)"),
    ("curve past the next PVI", edit("<PVI>210 9.0</PVI>", '<ParaCurve length="100">160 9.0</ParaCurve>'
                                                           "<PVI>200 9.0</PVI><PVI>210 9.0</PVI>"),
     r"<ParaCurve> at station 160\.000: the vertical curve ends at station 210\.000, after the PVI after it "
     r"\(station 200\.000\)"),
    ("curves overlap", edit("<PVI>210 9.0</PVI>", '<ParaCurve length="40">130 9.0</ParaCurve>'
                                                  '<ParaCurve length="40">160 9.5</ParaCurve><PVI>210 9.0</PVI>'),
     r"<ParaCurve> at station 160\.000: the vertical curve starts at station 140\.000, before the curve before it "
     r"\(station 150\.000\)"),
    ("circ length", edit("<PVI>210 9.0</PVI>", '<CircCurve length="5" radius="1000">150 9.0</CircCurve>'
                                               "<PVI>210 9.0</PVI>"),
     r"<CircCurve> at station 150\.000: length 5\.000 m does not match the arc of radius 1000 m between grades "
     r"-0\.02000 and 0\.00000, 19\.997 m long"),
    ("circ radius", edit("<PVI>210 9.0</PVI>", '<CircCurve length="5">150 9.0</CircCurve><PVI>210 9.0</PVI>'),
     r"<CircCurve> at station 150\.000: missing attribute radius"),
    ("spiral first, no PI", document(alignment(spiral((E0, N0), (E0, N0), (E0 + 10, N0), "cw", 10.0, math.inf,
                                                      500.0), FLAT)),
     r"element 1 <Spiral> at station 100\.000: needs a <PI> \(or an element before it\) to give its start "
     r"direction"),
    ("curve without centre or radius", edit(f"<Center>{ne(ARC_CENTRE)}</Center>", "").replace(
        f' radius="{ARC_R:.9f}"', ""), ELEMENT_2.format("Curve") + "needs a <Center> or a radius attribute"),
    ("full circle", edit(f'length="{ARC_L:.9f}"', 'length="700"'), r"turns 401 degrees, more than a full circle"),
]


@pytest.mark.parametrize("text, pattern", [m[1:] for m in MISTAKES], ids=[m[0] for m in MISTAKES])
def test_every_mistake_is_one_input_error_naming_the_place(tmp_path, text, pattern):
    with pytest.raises(InputError, match=pattern) as caught:
        read_alignment_landxml(write(tmp_path, text))
    assert "\n" not in str(caught.value) and str(caught.value).startswith(str(tmp_path / "route.xml"))


def test_an_unknown_alignment_name_lists_the_names(tmp_path):
    path = write(tmp_path, document(alignment(STRAIGHT, FLAT, name="A"), alignment(STRAIGHT, FLAT, name="B")))
    with pytest.raises(InputError, match=r'route\.xml: no <Alignment> is named "C" \(alignment_name\); names found: '
                                         r'"A", "B"'):
        read_alignment_landxml(path, name="C")
    assert read_alignment_landxml(path, name="B")[0].source.endswith('"B"')


def test_alignment_z_must_be_a_level(tmp_path):
    with pytest.raises(InputError, match=r'alignment_z must be one of "axis", "invert" for a LandXML alignment '
                                         r'\(its profile gives levels\); got "depth"'):
        read_alignment_landxml(simple(tmp_path), z_means="depth")


def test_a_missing_file_and_a_folder_are_input_errors(tmp_path):
    with pytest.raises(InputError, match=r"nowhere\.xml: file not found"):
        read_alignment_landxml(tmp_path / "nowhere.xml")
    with pytest.raises(InputError, match=r"is a folder, not a regular file"):
        read_alignment_landxml(tmp_path)


def test_too_many_vertices_is_refused_before_they_are_made(tmp_path, monkeypatch):
    monkeypatch.setattr(landxml, "MAX_VERTICES", 10)
    with pytest.raises(InputError, match=r'"D1": following its curves within 5 mm needs more than 10 vertices '
                                         r"\(from station 150\.000\)"):
        read_alignment_landxml(write(tmp_path, BASE))


def test_the_base_of_the_mistakes_reads(tmp_path):
    route = read_landxml_route(write(tmp_path, BASE))
    np.testing.assert_allclose(route.xy[-1], ARC_END, atol=1e-6)


def test_a_curve_without_length_or_center_is_built_from_its_other_points(tmp_path):
    # The same arc three ways: Start/Center/End with length (BASE); without length (swept from Start to End about
    # the centre); and with radius and <PI> instead of <Center> (the PI lies on the start tangent).
    no_length = edit(f' length="{ARC_L:.9f}"', "")
    half_angle = ARC_L / ARC_R / 2
    pi = (ARC_START[0] + ARC_R * math.tan(half_angle), ARC_START[1])
    no_centre = edit(f"<Center>{ne(ARC_CENTRE)}</Center>", f"<PI>{ne(pi)}</PI>")
    for text in (no_length, no_centre):
        route = read_landxml_route(write(tmp_path, text))
        assert route.station_m[-1] == pytest.approx(210.0, abs=1e-6)
        on_arc = route.station_m >= 150.0
        np.testing.assert_allclose(route.xy[on_arc], circle_point(ARC_CENTRE, ARC_R, -math.pi / 2, 1.0,
                                                                  route.station_m[on_arc] - 150.0), atol=1e-6)
