"""Reading a drive alignment from a LandXML 1.2 file: its horizontal geometry and its design profile, sampled into the
3-D polyline of vertices a drive follows.

What is read
    The root <LandXML> (namespace http://www.landxml.org/schema/LandXML-1.2; 1.0, 1.1 and no namespace are read the
    same way, another namespace with a warning), its <Units> (metric, linearUnit "meter" only), and one
    <Alignments><Alignment>: chosen by its `name` attribute, or the file's only one.

    Horizontal geometry, <CoordGeom>: <Line>, <Curve> (circular arc) and <Spiral> (clothoid; entry from radius INF,
    exit to radius INF, or partial between two finite radii), in order, each joining the one before it. Points are
    "northing easting [elevation]" text (LandXML 1.2 schema, PointType), or a `pntRef` to a <CgPoint>; x = easting,
    y = northing. Elevations in <Start>/<End> are not used: levels come from the profile.

    Vertical geometry, <Profile><ProfAlign>: <PVI> (station elevation), <ParaCurve length> (a symmetric parabola of
    plan length `length` centred on its PVI) and <CircCurve length radius> (a circle of |radius| tangent to both
    grades, sag or crest as the grades say: files give a crest's radius negative or positive; `length` is its arc
    length and must agree with the radius and grades within 10 mm). A drive needs one profile: a missing one is an
    error; several need `profile` to choose.

    Only <Units>, <CgPoints> and <Alignments> are kept while parsing; other sections (surfaces, parcels, survey)
    are passed over without being built.

How the geometry is built (our choices)
    Every element starts at its own <Start>. Its start direction comes from its points: a Line from <Start> to
    <End>, a Curve from <Center> (else <PI>, else the end direction of the element before), a Spiral from <PI> (the
    intersection of its tangents; else the element before). The `dir`, `dirStart` and `dirEnd` attributes are not
    read: files in use disagree on their convention (the LandXML 1.1 schema's <Units> documentation measures
    directions counter-clockwise from north; a published road example measures them clockwise from north, in
    grads), while points mean the same in every file. So no angularUnit or directionUnit is needed either.

    From the start point and direction, an element's curvature (0 for a Line; 1/radius for a Curve; changing
    linearly with length from 1/radiusStart to 1/radiusEnd for a Spiral, INF = 0) and its length give the path; its
    computed end must lie within `JOIN_TOLERANCE_M` (10 mm) of its stated <End>, and every <Start> within
    `JOIN_TOLERANCE_M` of the <End> before it. A stated `staStart` (element or alignment `length`) must agree with
    the running station to the same tolerance.

Sampling
    Vertices lie where the geometry changes (ends of elements, PVIs, ends of vertical curves) and, between them, close
    enough that every chord departs from the true curve by at most `CHORD_TOLERANCE_M` (5 mm) in plan and in level:
    a chord over length h of a path of curvature at most k departs from it by at most k h^2 / 8 (the sagitta
    c^2 / 8R of an arc), and a level function with |z''| at most k departs from its chord by at most k h^2 / 8.
    Lines and straight grades give their ends only.

Stations and chainage
    LandXML stations are plan (horizontal) distances along the alignment from its `staStart`. settle measures
    chainage along the 3-D axis from the first vertex, starting at the drive's start chainage: give the alignment's
    staStart as the drive's start chainage; the two then differ by the extra length of the sloping axis, about
    g^2 / 2 of the length at grade g (5 mm per 100 m at 1 %), and a warning says so when it passes
    `CHAINAGE_NOTE_M` at the end of the drive.

Not read (an error naming the element and its station): <Chain>, <IrregularLine>, a Spiral of a spiType other than
clothoid, <UnsymParaCurve>, station equations (<StaEquation>), units other than metres. A <Feature> (extension data)
is skipped. A document type declaration (<!DOCTYPE>) is refused, so no entity is ever expanded or fetched.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from xml.etree import ElementTree
from xml.parsers import expat

import numpy as np

from ..errors import InputError
from .tables import (COORDINATE_LIMIT_M, LEVEL_LIMIT_M, Alignment, bounds_text, check_alignment, listing,
                     printable, refuse_special_file, shown)

#: Namespaces of LandXML read without a warning ("" = none).
LANDXML_NAMESPACES = ("http://www.landxml.org/schema/LandXML-1.2", "http://www.landxml.org/schema/LandXML-1.1",
                      "http://www.landxml.org/schema/LandXML-1.0", "")
JOIN_TOLERANCE_M = 0.010  # computed end vs <End>, <Start> vs the <End> before, stated vs running station [m]
CHORD_TOLERANCE_M = 0.005  # largest departure of a chord from the true curve, in plan and in level [m]
MIN_VERTEX_SPACING_M = 0.005  # break points closer than this are one vertex [m]
MAX_VERTICES = 100_000  # more means a radius or vertical curve far tighter than a tunnel's [-]
MAX_TURN_RAD = 2.0 * math.pi  # one element turning more than a full circle is a mistake [rad]
CHAINAGE_NOTE_M = 0.05  # warn when 3-D chainage and plan station differ by more at the end [m]
Z_MEANINGS = ("axis", "invert")  # what a profile level can be on a drive

_KEPT_SECTIONS = ("Units", "CgPoints", "Alignments")  # children of <LandXML> read; others are skipped unbuilt
_PLAN_ELEMENTS = ("Line", "Curve", "Spiral")
_PROFILE_ELEMENTS = ("PVI", "ParaCurve", "CircCurve")
_ROT = {"ccw": 1.0, "cw": -1.0}  # sign of the curvature: counter-clockwise turns left
_GAUSS_NODES, _GAUSS_WEIGHTS = np.polynomial.legendre.leggauss(8)
_OVERLAP_TOLERANCE_M = 0.001  # vertical curves touching to rounding of the file's numbers do not overlap [m]
_MAX_STEP_TURN_RAD = 0.05  # heading change per integration step: 8-node Gauss-Legendre is then exact to rounding


# ----------------------------------------------------------------------------------------------- geometry (pure)
def clothoid_points(start_xy, heading_rad: float, curvature_start: float, curvature_end: float, length_m: float,
                    at_m) -> np.ndarray:
    """Points of a plane path whose curvature changes linearly with length: a line (both curvatures 0), a circular
    arc (equal curvatures) or a piece of clothoid.

    Parameters
    ----------
    start_xy : (2,) array      Start point. [m]
    heading_rad : float        Direction of travel at the start, counter-clockwise from +x. [rad]
    curvature_start, curvature_end : float  Signed curvature at the start and the end, positive turning left. [1/m]
    length_m : float           Length of the path. [m]
    at_m : array_like          Distances along the path, from 0 to length_m. [m]

    Returns
    -------
    (n, 2) ndarray  The points at `at_m`. [m]

    Notes
    -----
    Heading theta(l) = theta0 + k0 l + (k1 - k0) l^2 / (2 L); the point is the start plus the integral of
    (cos theta, sin theta) dl, taken with 8-node Gauss-Legendre quadrature over steps turning at most 0.05 rad.
    """
    at = np.asarray(at_m, dtype=float).reshape(-1)
    rate = (curvature_end - curvature_start) / length_m if length_m > 0 else 0.0
    turn = length_m * max(abs(curvature_start), abs(curvature_end))
    grid = np.linspace(0.0, length_m, int(math.ceil(turn / _MAX_STEP_TURN_RAD)) + 2)
    knots = np.unique(np.concatenate([grid, np.clip(at, 0.0, length_m)]))
    a, b = knots[:-1, None], knots[1:, None]
    l = (a + b) / 2.0 + (b - a) / 2.0 * _GAUSS_NODES[None, :]
    theta = heading_rad + curvature_start * l + rate * l * l / 2.0
    w = (b - a) / 2.0 * _GAUSS_WEIGHTS[None, :]
    steps = np.column_stack([(w * np.cos(theta)).sum(axis=1), (w * np.sin(theta)).sum(axis=1)])
    offsets = np.vstack([np.zeros((1, 2)), np.cumsum(steps, axis=0)])
    return np.asarray(start_xy, dtype=float) + offsets[np.searchsorted(knots, np.clip(at, 0.0, length_m))]


@dataclass(frozen=True)
class PlanElement:
    """One element of the horizontal geometry, as a path of linearly changing curvature (see `clothoid_points`)."""

    kind: str  # "Line" | "Curve" | "Spiral"
    number: int  # 1-based position in <CoordGeom>, for messages
    station_m: float  # plan station of its start [m]
    length_m: float  # [m]
    start_xy: np.ndarray  # (easting, northing) [m]
    heading_rad: float  # at the start, counter-clockwise from +x (east) [rad]
    curvature_start: float  # signed, positive turning left [1/m]
    curvature_end: float  # [1/m]
    end_xy: np.ndarray  # the <End> stated in the file [m]

    def points(self, at_m) -> np.ndarray:
        """Points at distances `at_m` from the element's start. [m]"""
        return clothoid_points(self.start_xy, self.heading_rad, self.curvature_start, self.curvature_end,
                               self.length_m, at_m)

    def end_heading_rad(self) -> float:
        """Direction of travel at the end. [rad]"""
        return self.heading_rad + self.length_m * (self.curvature_start + self.curvature_end) / 2.0

    def curvature(self, at_m) -> np.ndarray:
        """|curvature| at distances `at_m` from the start. [1/m]"""
        t = np.clip(np.asarray(at_m, dtype=float) / self.length_m, 0.0, 1.0)
        return np.abs(self.curvature_start + (self.curvature_end - self.curvature_start) * t)


@dataclass(frozen=True)
class ProfilePiece:
    """One piece of a design profile between two stations: a grade, a parabola or a circle.

    grade     level = z0 + g1 (s - s0)
    parabola  level = z0 + g1 x + (g2 - g1) x^2 / (2 L), x = s - s0, L = end - start (the equal-tangent
              parabolic vertical curve of road design; common practice)
    circle    level = zc - sense sqrt(R^2 - (s - sc)^2), sense +1 for a sag (centre above), -1 for a crest
    """

    kind: str  # "grade" | "parabola" | "circle"
    start_m: float  # station [m]
    end_m: float  # station [m]
    z0_m: float = 0.0  # level at start_m (grade, parabola) [m]
    g1: float = 0.0  # grade at start_m [-]
    g2: float = 0.0  # grade at end_m (parabola) [-]
    centre_m: tuple[float, float] = (0.0, 0.0)  # circle centre (station, level) [m]
    radius_m: float = 0.0  # circle [m]
    sense: float = 1.0  # circle: +1 sag, -1 crest

    def level(self, s) -> np.ndarray:
        """Level at stations s. [m]"""
        s = np.asarray(s, dtype=float)
        x = s - self.start_m
        if self.kind == "grade":
            return self.z0_m + self.g1 * x
        if self.kind == "parabola":
            return self.z0_m + self.g1 * x + (self.g2 - self.g1) * x * x / (2.0 * (self.end_m - self.start_m))
        d = np.clip(s, self.start_m, self.end_m) - self.centre_m[0]
        return self.centre_m[1] - self.sense * np.sqrt(self.radius_m ** 2 - d * d)

    def bend(self, s) -> np.ndarray:
        """|d2 level / d station2| at stations s. [1/m]"""
        s = np.asarray(s, dtype=float)
        if self.kind == "grade":
            return np.zeros_like(s)
        if self.kind == "parabola":
            return np.full_like(s, abs(self.g2 - self.g1) / (self.end_m - self.start_m))
        d = np.clip(s, self.start_m, self.end_m) - self.centre_m[0]
        return self.radius_m ** 2 / (self.radius_m ** 2 - d * d) ** 1.5


def circular_vertical_curve(station_m: float, level_m: float, g1: float, g2: float, radius_m: float) -> ProfilePiece:
    """The circle of radius R tangent to the grade g1 arriving at a PVI and the grade g2 leaving it. [m]

    The tangent points lie T = R tan(|a2 - a1| / 2) from the PVI along each grade, a = atan(g); the arc length is
    R |a2 - a1| (LandXML's CircCurve `length`).
    """
    a1, a2 = math.atan(g1), math.atan(g2)
    tangent = radius_m * math.tan(abs(a2 - a1) / 2.0)
    start = (station_m - tangent * math.cos(a1), level_m - tangent * math.sin(a1))
    sense = 1.0 if a2 > a1 else -1.0
    centre = (start[0] - sense * radius_m * math.sin(a1), start[1] + sense * radius_m * math.cos(a1))
    return ProfilePiece("circle", start[0], station_m + tangent * math.cos(a2), z0_m=start[1], g1=g1, g2=g2,
                        centre_m=centre, radius_m=radius_m, sense=sense)


def parabolic_vertical_curve(station_m: float, level_m: float, g1: float, g2: float, length_m: float) -> ProfilePiece:
    """The symmetric parabola of plan length L centred on a PVI, joining grade g1 to grade g2. [m]"""
    return ProfilePiece("parabola", station_m - length_m / 2.0, station_m + length_m / 2.0,
                        z0_m=level_m - g1 * length_m / 2.0, g1=g1, g2=g2)


def profile_levels(pieces, stations_m) -> np.ndarray:
    """Levels of a profile (pieces in station order) at stations; outside it the end grades run on. [m]"""
    s = np.asarray(stations_m, dtype=float)
    k = _index([p.start_m for p in pieces], s, "right")
    z = np.empty_like(s)
    for i in np.unique(k):
        z[k == i] = pieces[i].level(s[k == i])
    return z


def _index(starts, s, side: str) -> np.ndarray:
    """Index of the piece (sorted by start station) that holds each station; "left" takes the earlier piece at a
    joint, "right" the later; stations outside fall to the first or last piece."""
    return np.clip(np.searchsorted(starts, s, side=side) - 1, 0, len(starts) - 1)


# ----------------------------------------------------------------------------------------------- XML reading
def _parse(path: Path) -> tuple[ElementTree.Element, list[str]]:
    """The root element of an XML file, tags of the LandXML namespace without it (others as "{uri}name").

    Parsed with expat; a document type declaration is refused, so no entity can be declared, expanded or fetched.
    """
    refuse_special_file(path)
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise InputError(f"{printable(path)}: file not found") from None
    except OSError as exc:
        raise InputError(f"{printable(path)}: cannot be read: {exc.strerror}") from None
    if not data.strip():
        raise InputError(f"{printable(path)}: the file is empty; expected a LandXML 1.2 document")
    builder = ElementTree.TreeBuilder()
    state = {"namespace": None, "depth": 0, "skip_from": None}

    def name(tag: str) -> str:
        uri, _, local = tag.rpartition(" ")
        if state["namespace"] is None:
            state["namespace"] = uri
        return local if uri == state["namespace"] else f"{{{uri}}}{local}"

    # only the parts of the file an alignment needs are kept: a surface (TIN) can be most of a file's size
    def start(tag: str, attrs: dict) -> None:
        state["depth"] += 1
        tag = name(tag)
        if state["skip_from"] is None and state["depth"] == 2 and tag not in _KEPT_SECTIONS:
            state["skip_from"] = state["depth"]
        if state["skip_from"] is None:
            builder.start(tag, {attribute(k): v for k, v in attrs.items()})

    def end(tag: str) -> None:
        if state["skip_from"] is None:
            builder.end(name(tag))
        elif state["skip_from"] == state["depth"]:
            state["skip_from"] = None
        state["depth"] -= 1

    def text(data: str) -> None:
        if state["skip_from"] is None:
            builder.data(data)

    def refuse(*_):
        raise InputError(f"{printable(path)}: holds a document type declaration (<!DOCTYPE ...>); a LandXML file "
                         "needs none and settle does not read one")

    def attribute(key: str) -> str:
        uri, _, local = key.rpartition(" ")
        return f"{{{uri}}}{local}" if uri else local

    parser = expat.ParserCreate(namespace_separator=" ")  # a space is in no URI and no name
    parser.StartElementHandler = start
    parser.EndElementHandler = end
    parser.CharacterDataHandler = text
    parser.StartDoctypeDeclHandler = refuse
    try:
        parser.Parse(data, True)
    except expat.ExpatError as exc:
        raise InputError(f"{printable(path)}: not valid XML: {expat.ErrorString(exc.code)} at line {exc.lineno}, "
                         f"column {exc.offset + 1}") from None
    root = builder.close()
    if root.tag != "LandXML":
        raise InputError(f"{printable(path)}: the root element is <{printable(root.tag)}>, not <LandXML>; "
                         "not a LandXML file")
    notes = []
    if state["namespace"] not in LANDXML_NAMESPACES:
        notes.append(f"{printable(path)}: namespace {shown(state['namespace'])} is not LandXML 1.2's; read as "
                     "LandXML 1.2")
    return root, notes


def _check_units(root, path: Path) -> None:
    """Metric units with linearUnit (and elevationUnit, when given) "meter"; anything else is an InputError."""
    units = root.find("Units")
    if units is None or len(units) == 0:
        raise InputError(f'{printable(path)}: no <Units>; settle needs <Units><Metric linearUnit="meter" .../>'
                         "</Units>")
    system = units[0]
    if system.tag != "Metric":
        raise InputError(f"{printable(path)} <Units>: <{printable(system.tag)}> units; settle reads metres only "
                         '(<Metric linearUnit="meter">)')
    for attribute, required in (("linearUnit", True), ("elevationUnit", False)):
        unit = system.get(attribute)
        if unit is None and not required:
            continue
        if unit != "meter":
            got = f"got {shown(unit)}" if unit is not None else "the attribute is missing"
            raise InputError(f'{printable(path)} <Units><Metric>: {attribute} must be "meter" (settle reads metres '
                             f"only); {got}")


def _choose_alignment(root, path: Path, name: str | None, name_key: str):
    """The <Alignment> named `name`, or the file's only one."""
    found = [a for group in root.findall("Alignments") for a in group.findall("Alignment")]
    if not found:
        raise InputError(f"{printable(path)}: no <Alignments><Alignment> in the file")
    return _choose_named(found, name, "Alignment", "alignments", name_key, printable(path), "(its name attribute)")


def _choose_named(found: list, name: str | None, tag: str, plural: str, key: str, where: str, hint: str = ""):
    """Of the elements `found` (<tag>), the one named `name`, or the only one when `name` is None; else an
    InputError listing the names."""
    names = [e.get("name", "") for e in found]
    if name is None:
        if len(found) > 1:
            raise InputError(f"{where}: holds {len(found)} {plural}; choose one with {key}{' ' + hint if hint else ''}"
                             f"; names found: {listing(names)}")
        return found[0]
    hits = [e for e in found if e.get("name") == name]
    if len(hits) != 1:
        problem = f"no <{tag}> is" if not hits else f"{len(hits)} <{tag}> elements are"
        raise InputError(f"{where}: {problem} named {shown(name)} ({key}); names found: {listing(names)}")
    return hits[0]


def _number(element, attribute: str, where: str, gt=None, ge=None, le=None, infinite: bool = False,
            required: bool = True) -> float | None:
    """A numeric attribute: finite and within bounds (`infinite`: "INF" also, as inf). Missing and not
    `required`: None."""
    text = element.get(attribute)
    if text is None:
        if not required:
            return None
        raise InputError(f"{where}: missing attribute {attribute}")
    if infinite and text.strip() == "INF":
        return math.inf
    try:
        value = float(text)
    except ValueError:
        value = math.nan
    bound = dict(gt=gt, ge=ge, le=le)
    if not (math.isfinite(value) and (gt is None or value > gt) and (ge is None or value >= ge)
            and (le is None or value <= le)):
        allowed = bounds_text(**bound, symbol=" m") if any(v is not None for v in bound.values()) else "finite"
        also = ' or "INF"' if infinite else ""
        raise InputError(f"{where}: attribute {attribute} must be a number {allowed}{also}; got {shown(text)}")
    return value


def _pair(text, where: str, what: str, first: str, second: str, extra: int = 0) -> tuple[float, float]:
    """Two leading numbers of a space-separated text (`extra` more allowed and ignored), each finite and plausible."""
    parts = (text or "").split()
    values = []
    try:
        values = [float(p) for p in parts]
    except ValueError:
        pass
    if not 2 <= len(values) <= 2 + extra or len(values) != len(parts) or not all(map(math.isfinite, values)):
        more = " [elevation]" if extra else ""
        raise InputError(f'{where}: <{what}> must hold "{first} {second}{more}" as numbers; got '
                         f"{shown((text or '').strip())}")
    return values[0], values[1]


def _point(element, where: str, what: str, points: dict, required: bool = True) -> np.ndarray | None:
    """Child point <what> of `element` as (easting, northing): its "northing easting [elevation]" text or the
    <CgPoint> its pntRef names. [m]"""
    child = element.find(what)
    if child is None:
        if not required:
            return None
        raise InputError(f"{where}: missing <{what}>")
    text = child.text
    ref = child.get("pntRef")
    if ref is not None and not (text or "").strip():
        if ref not in points:
            raise InputError(f"{where}: <{what}> pntRef {shown(ref)} names no <CgPoint>")
        text = points[ref]
    northing, easting = _pair(text, where, what, "northing", "easting", extra=1)
    if max(abs(northing), abs(easting)) > COORDINATE_LIMIT_M:
        raise InputError(f"{where}: <{what}> northing and easting must be "
                         f"{bounds_text(ge=-COORDINATE_LIMIT_M, le=COORDINATE_LIMIT_M, symbol=' m')}; got "
                         f"{northing:g} {easting:g}")
    return np.array([easting, northing])


def _rot(element, where: str) -> float:
    rot = element.get("rot")
    if rot not in _ROT:
        got = f"got {shown(rot)}" if rot is not None else "the attribute is missing"
        raise InputError(f'{where}: attribute rot must be "cw" or "ccw"; {got}')
    return _ROT[rot]


def _heading(vector) -> float:
    return math.atan2(vector[1], vector[0])


def _line(element, where: str, start, end, points, before) -> tuple[float, float, float, float]:
    """(heading, curvature start, curvature end, length) of a <Line>: its direction is <Start> to <End>, and its
    `length` (when given) must still reach the <End>."""
    chord = end - start
    if math.hypot(*chord) < JOIN_TOLERANCE_M:
        raise InputError(f"{where}: <Start> and <End> are the same point; the line has no length")
    length = _number(element, "length", where, gt=0.0, le=COORDINATE_LIMIT_M, required=False)
    return _heading(chord), 0.0, 0.0, math.hypot(*chord) if length is None else length


def _curve(element, where: str, start, end, points, before) -> tuple[float, float, float, float]:
    """(heading, curvature start, curvature end, length) of a <Curve>: a circular arc."""
    sense = _rot(element, where)
    centre = _point(element, where, "Center", points, required=False)
    radius = _number(element, "radius", where, gt=0.0, le=COORDINATE_LIMIT_M, required=False)
    if centre is not None:
        spoke = start - centre
        if radius is not None and abs(math.hypot(*spoke) - radius) > JOIN_TOLERANCE_M:
            raise InputError(f"{where}: radius {radius:g} m but <Center> lies {math.hypot(*spoke):.3f} m from "
                             f"<Start> (more than {JOIN_TOLERANCE_M * 1000:g} mm apart)")
        radius = math.hypot(*spoke)
        if radius < JOIN_TOLERANCE_M:
            raise InputError(f"{where}: <Center> is the <Start> point; the arc has no radius")
        heading = _heading(spoke) + sense * math.pi / 2.0
    else:
        if radius is None:
            raise InputError(f"{where}: needs a <Center> or a radius attribute")
        heading = _start_heading(element, where, start, points, before)
        centre = start + sense * radius * np.array([-math.sin(heading), math.cos(heading)])
    length = _number(element, "length", where, gt=0.0, le=COORDINATE_LIMIT_M, required=False)
    if length is None:
        swept = sense * (_heading(end - centre) - _heading(start - centre))
        length = radius * (swept % (2.0 * math.pi))
        if length < JOIN_TOLERANCE_M:
            raise InputError(f"{where}: <Start> and <End> are the same point and no length is given")
    return heading, sense / radius, sense / radius, length


def _spiral(element, where: str, start, end, points, before) -> tuple[float, float, float, float]:
    """(heading, curvature start, curvature end, length) of a clothoid <Spiral>."""
    kind = element.get("spiType")
    if kind != "clothoid":
        got = f"spiType {shown(kind)}" if kind is not None else "no spiType attribute"
        raise InputError(f"{where}: {got}; settle reads clothoid spirals only (spiType=\"clothoid\")")
    sense = _rot(element, where)
    length = _number(element, "length", where, gt=0.0, le=COORDINATE_LIMIT_M)
    radii = [_number(element, a, where, gt=0.0, le=COORDINATE_LIMIT_M, infinite=True)
             for a in ("radiusStart", "radiusEnd")]
    heading = _start_heading(element, where, start, points, before)
    return heading, sense / radii[0], sense / radii[1], length


def _start_heading(element, where: str, start, points, before) -> float:
    """Start direction from <PI> (on the start tangent), else the end direction of the element before."""
    pi = _point(element, where, "PI", points, required=False)
    if pi is not None and math.hypot(*(pi - start)) >= JOIN_TOLERANCE_M:
        return _heading(pi - start)
    if before is not None:
        return before.end_heading_rad()
    raise InputError(f"{where}: needs a <PI> (or an element before it) to give its start direction")


def _plan_elements(alignment, source: str, station0: float, points: dict) -> list[PlanElement]:
    """The elements of <CoordGeom>, checked: each ends at its <End> and starts at the <End> before."""
    geometry = alignment.findall("CoordGeom")
    if len(geometry) != 1:
        raise InputError(f"{source}: {'no' if not geometry else len(geometry)} <CoordGeom> (horizontal geometry); "
                         "needs one")
    elements: list[PlanElement] = []
    station = station0
    for number, element in enumerate(list(geometry[0]), start=1):
        if element.tag == "Feature":
            continue
        where = f"{source} <CoordGeom> element {number} <{printable(element.tag)}> at station {station:.3f}"
        if element.tag not in _PLAN_ELEMENTS:
            raise InputError(f"{where}: not supported; settle reads <Line>, <Curve> and <Spiral> (clothoid)")
        stated = _number(element, "staStart", where, ge=-COORDINATE_LIMIT_M, le=COORDINATE_LIMIT_M, required=False)
        if stated is not None and abs(stated - station) > JOIN_TOLERANCE_M:
            raise InputError(f"{where}: staStart is {stated:.3f} but the elements before it end at station "
                             f"{station:.3f} ({abs(stated - station) * 1000:.0f} mm apart)")
        start = _point(element, where, "Start", points)
        end = _point(element, where, "End", points)
        before = elements[-1] if elements else None
        if before is not None:
            gap_mm = math.hypot(*(start - before.end_xy)) * 1000.0
            if gap_mm > JOIN_TOLERANCE_M * 1000.0:
                raise InputError(f"{where}: its <Start> lies {gap_mm:.0f} mm from the <End> of element "
                                 f"{before.number} <{before.kind}>; the elements must join")
        build = {"Line": _line, "Curve": _curve, "Spiral": _spiral}[element.tag]
        heading, k0, k1, length = build(element, where, start, end, points, before)
        turn = length * (abs(k0) + abs(k1)) / 2.0
        if turn > MAX_TURN_RAD:
            raise InputError(f"{where}: turns {math.degrees(turn):.0f} degrees, more than a full circle; check its "
                             "length and radii")
        piece = PlanElement(element.tag, number, station, length, start, heading, k0, k1, end)
        miss_mm = math.hypot(*(piece.points([length])[0] - end)) * 1000.0
        if miss_mm > JOIN_TOLERANCE_M * 1000.0:
            raise InputError(f"{where}: the end computed from its <Start>, start direction, radii and length "
                             f"{length:.3f} m lies {miss_mm:.0f} mm from its <End> (more than "
                             f"{JOIN_TOLERANCE_M * 1000:g} mm); check rot, the radii and the length")
        elements.append(piece)
        station += length
        if abs(station) > COORDINATE_LIMIT_M:
            raise InputError(f"{where}: the station at its end must be "
                             f"{bounds_text(ge=-COORDINATE_LIMIT_M, le=COORDINATE_LIMIT_M, symbol=' m')}; got "
                             f"{station:g}")
    if not elements:
        raise InputError(f"{source}: <CoordGeom> holds no <Line>, <Curve> or <Spiral>")
    return elements


def _design_profile(alignment, source: str, profile: str | None, profile_key: str):
    """The one <ProfAlign> of the alignment (or the one named `profile`) and its label for messages."""
    found = [p for group in alignment.findall("Profile") for p in group.findall("ProfAlign")]
    if not found:
        raise InputError(f"{source}: no design profile (<Profile><ProfAlign>); a drive needs the levels of its axis")
    chosen = _choose_named(found, profile, "ProfAlign", "design profiles (<ProfAlign>)", profile_key, source)
    return chosen, f"{source} <ProfAlign> {shown(chosen.get('name', ''))}"


def _profile_pieces(profile, label: str) -> list[ProfilePiece]:
    """The profile as grades and vertical curves in station order, checked: stations increase, curves fit between
    their neighbours and their lengths agree with their grades."""
    pvis = []  # (where, tag, station, level, element)
    for element in profile:
        if element.tag == "Feature":
            continue
        station = pvis[-1][2] if pvis else None
        at = f" after station {station:.3f}" if station is not None else ""
        where = f"{label} <{printable(element.tag)}>{at}"
        if element.tag not in _PROFILE_ELEMENTS:
            raise InputError(f"{where}: not supported; settle reads <PVI>, <ParaCurve> and <CircCurve>")
        s, z = _pair(element.text, where, element.tag, "station", "elevation")
        where = f"{label} <{element.tag}> at station {s:.3f}"
        if abs(s) > COORDINATE_LIMIT_M or abs(z) > LEVEL_LIMIT_M:
            raise InputError(f"{where}: station must be {bounds_text(ge=-COORDINATE_LIMIT_M, le=COORDINATE_LIMIT_M)}"
                             f" m and elevation {bounds_text(ge=-LEVEL_LIMIT_M, le=LEVEL_LIMIT_M)} m; got "
                             f"{s:g} {z:g}")
        if pvis and s - pvis[-1][2] < MIN_VERTEX_SPACING_M:
            raise InputError(f"{where}: stations must increase along the profile; the one before is at station "
                             f"{pvis[-1][2]:.3f}")
        pvis.append((where, element.tag, s, z, element))
    if len(pvis) < 2:
        raise InputError(f"{label}: {len(pvis)} PVI(s); a profile needs at least 2")
    stations = np.array([p[2] for p in pvis])
    levels = np.array([p[3] for p in pvis])
    grades = np.diff(levels) / np.diff(stations)
    curves: list[ProfilePiece | None] = [None] * len(pvis)
    for i, (where, tag, s, z, element) in enumerate(pvis):
        if tag == "PVI":
            continue
        length = _number(element, "length", where, ge=0.0, le=COORDINATE_LIMIT_M)
        if tag == "CircCurve":
            radius = abs(_number(element, "radius", where, le=COORDINATE_LIMIT_M, ge=-COORDINATE_LIMIT_M))
        if length == 0.0:
            continue
        if i in (0, len(pvis) - 1):
            raise InputError(f"{where}: a vertical curve at the {'first' if i == 0 else 'last'} PVI of the profile "
                             "has no grade on one side")
        g1, g2 = grades[i - 1], grades[i]
        if tag == "ParaCurve":
            curves[i] = parabolic_vertical_curve(s, z, g1, g2, length)
        else:
            if radius == 0.0:
                raise InputError(f"{where}: attribute radius must not be 0")
            arc = radius * abs(math.atan(g2) - math.atan(g1))
            if abs(arc - length) > JOIN_TOLERANCE_M:
                raise InputError(f"{where}: length {length:.3f} m does not match the arc of radius {radius:g} m "
                                 f"between grades {g1:.5f} and {g2:.5f}, {arc:.3f} m long")
            curves[i] = circular_vertical_curve(s, z, g1, g2, radius)
    return _join_profile(pvis, stations, levels, grades, curves)


def _join_profile(pvis, stations, levels, grades, curves) -> list[ProfilePiece]:
    """Grades between the vertical curves; a curve reaching past a neighbouring PVI or curve is an InputError."""
    pieces: list[ProfilePiece] = []
    reach = stations[0]  # station up to which the profile is laid
    for i in range(1, len(pvis)):
        curve = curves[i] if i < len(pvis) - 1 else None
        if curve is not None:
            limit, what = max(stations[i - 1], reach), "the PVI" if reach <= stations[i - 1] else "the curve"
            if curve.start_m < limit - _OVERLAP_TOLERANCE_M:
                before = f"{what} before it (station {limit:.3f})"
                raise InputError(f"{pvis[i][0]}: the vertical curve starts at station {curve.start_m:.3f}, before "
                                 f"{before}")
            if curve.end_m > stations[i + 1] + _OVERLAP_TOLERANCE_M:
                raise InputError(f"{pvis[i][0]}: the vertical curve ends at station {curve.end_m:.3f}, after the "
                                 f"PVI after it (station {stations[i + 1]:.3f})")
        stop = curve.start_m if curve is not None else stations[i]
        if stop - reach > 0.0:
            pieces.append(ProfilePiece("grade", reach, stop, z0_m=levels[i - 1] + grades[i - 1] * (reach - stations[
                i - 1]), g1=grades[i - 1]))
        if curve is not None:
            pieces.append(curve)
            reach = curve.end_m
        else:
            reach = max(reach, stations[i])
    return pieces


# ----------------------------------------------------------------------------------------------- sampling
def _bend_at(items, starts: np.ndarray, s: float, side: str, measure) -> float:
    """`measure` (|curvature| or |z''|) at station s of the item that holds it; at a joint the item after it
    (side "right") or before it ("left"). [1/m]"""
    return float(measure(items[int(_index(starts, s, side))], s))


def _fill(a: float, b: float, bend) -> list[float]:
    """Stations strictly between a and b, spaced so that bend_max h^2 / 8 <= CHORD_TOLERANCE_M on every step, where
    bend_max is the larger `bend(station, side)` at the step's two ends, each taken inside the step (bend is largest
    at an end of any step between two break points: it is constant, linear, or rises away from one station)."""
    out: list[float] = []
    u = a
    while True:
        k = bend(u, "right")
        reach = b - u if k <= 0.0 else math.sqrt(8.0 * CHORD_TOLERANCE_M / k)
        k = max(k, bend(min(u + reach, b), "left"))
        step = b - u if k <= 0.0 else math.sqrt(8.0 * CHORD_TOLERANCE_M / k)
        if u + step >= b:
            return out
        if u + step > b - MIN_VERTEX_SPACING_M:  # do not leave a sliver before b: halve the rest instead
            out.append((u + b) / 2.0)
            return out
        u += step
        out.append(u)


def _stations(elements, pieces, station0: float, station1: float, where: str) -> np.ndarray:
    """Vertex stations: the break points of plan and profile, and enough between them for the 5 mm chord rule."""
    breaks = [e.station_m for e in elements] + [p.start_m for p in pieces] + [p.end_m for p in pieces]
    inner = sorted(s for s in breaks if station0 + MIN_VERTEX_SPACING_M < s < station1 - MIN_VERTEX_SPACING_M)
    keys = [station0]
    for s in inner:
        if s - keys[-1] >= MIN_VERTEX_SPACING_M and station1 - s >= MIN_VERTEX_SPACING_M:
            keys.append(s)
    keys.append(station1)

    def plan(e, s):
        return e.curvature(s - e.station_m)

    def level(p, s):
        return p.bend(s)

    element_starts = np.array([e.station_m for e in elements])
    piece_starts = np.array([p.start_m for p in pieces])

    def bend(s: float, side: str) -> float:
        return max(_bend_at(elements, element_starts, s, side, plan), _bend_at(pieces, piece_starts, s, side, level))

    # every step is at least sqrt(8 tol / bend_max) long, bend_max the larger bend at the ends of its interval: a
    # bound on the count, checked before any vertex is made
    intervals = list(zip(keys[:-1], keys[1:]))
    counts = [1.0 + (b - a) * math.sqrt(max(bend(a, "right"), bend(b, "left")) / (8.0 * CHORD_TOLERANCE_M))
              for a, b in intervals]
    if sum(counts) > MAX_VERTICES:
        a = intervals[int(np.argmax(np.cumsum(counts) > MAX_VERTICES))][0]
        raise InputError(f"{where}: following its curves within {CHORD_TOLERANCE_M * 1000:g} mm needs more than "
                         f"{MAX_VERTICES} vertices (from station {a:.3f}); a radius or vertical curve this tight is "
                         "not a tunnel's")
    out = [station0]
    for a, b in intervals:
        out += _fill(a, b, bend) + [b]
    return np.array(out)


def _plan_points(elements, stations: np.ndarray) -> np.ndarray:
    """(easting, northing) at plan stations. [m]"""
    k = _index([e.station_m for e in elements], stations, "right")
    xy = np.empty((len(stations), 2))
    for i in np.unique(k):
        e = elements[i]
        xy[k == i] = e.points(stations[k == i] - e.station_m)
    return xy


# ----------------------------------------------------------------------------------------------- public reader
@dataclass(frozen=True)
class LandXmlRoute:
    """A LandXML alignment sampled into vertices: plan position, level and plan station of each."""

    xy: np.ndarray  # (n, 2) easting, northing [m]
    level_m: np.ndarray  # profile level [m]
    station_m: np.ndarray  # plan station along the alignment [m]
    sta_start_m: float  # the alignment's staStart [m]
    source: str  # file and alignment, for messages
    warnings: tuple[str, ...] = ()


def read_landxml_route(path, name: str | None = None, profile: str | None = None, vertical: str = "axis",
                       name_key: str = "alignment_name", profile_key: str = "alignment_profile") -> LandXmlRoute:
    """Read one alignment of a LandXML 1.2 file and sample it into vertices (see the module notes).

    Parameters
    ----------
    path : path               The LandXML file.
    name : str or None        `name` of the <Alignment> to read; None = the file's only alignment.
    profile : str or None     `name` of the <ProfAlign> to use; None = the alignment's only design profile.
    vertical : str            What the profile level is ("axis" | "invert"), for messages.
    name_key, profile_key : str  Project-file keys named in messages.

    Returns
    -------
    LandXmlRoute  Vertices (easting, northing, level) with their plan stations. [m]
    """
    path = Path(path)
    root, notes = _parse(path)
    _check_units(root, path)
    alignment = _choose_alignment(root, path, name, name_key)
    source = f"{printable(path)} <Alignment> {shown(alignment.get('name', ''))}"
    if alignment.find("StaEquation") is not None:
        raise InputError(f"{source}: station equations (<StaEquation>) are not supported; give the alignment "
                         "continuous stations")
    station0 = _number(alignment, "staStart", source, ge=-COORDINATE_LIMIT_M, le=COORDINATE_LIMIT_M)
    points = {p.get("name"): p.text for p in root.iter("CgPoint") if p.get("name") is not None}
    elements = _plan_elements(alignment, source, station0, points)
    station1 = elements[-1].station_m + elements[-1].length_m
    stated = _number(alignment, "length", source, gt=0.0, le=COORDINATE_LIMIT_M, required=False)
    if stated is not None and abs(stated - (station1 - station0)) > JOIN_TOLERANCE_M:
        raise InputError(f"{source}: length is {stated:.3f} m but its elements add up to "
                         f"{station1 - station0:.3f} m")
    chosen, label = _design_profile(alignment, source, profile, profile_key)
    pieces = _profile_pieces(chosen, label)
    first, last = pieces[0].start_m, pieces[-1].end_m
    if first > station0 + JOIN_TOLERANCE_M or last < station1 - JOIN_TOLERANCE_M:
        raise InputError(f"{label}: covers stations {first:.3f} to {last:.3f} but the alignment runs from "
                         f"{station0:.3f} to {station1:.3f}; the profile must cover it all")
    stations = _stations(elements, pieces, station0, station1, source)
    # a joint takes the next element's <Start>, the end the last element's computed end (each within 10 mm)
    xy = _plan_points(elements, stations)
    level = profile_levels(pieces, stations)
    check_alignment(xy, level, vertical, source, [f"vertex {k} (station {s:.3f})" for k, s in
                                                enumerate(stations, start=1)])
    three_d = float(np.sum(np.sqrt(np.sum(np.diff(xy, axis=0) ** 2, axis=1) + np.diff(level) ** 2)))
    extra = station0 + three_d - station1
    if abs(extra) > CHAINAGE_NOTE_M:
        notes.append(f"{source}: settle's chainage runs along the 3-D axis from staStart {station0:.3f}; at the end "
                     f"of the alignment it is {station0 + three_d:.3f}, {extra:.3f} m more than the plan station "
                     f"{station1:.3f}. Chainages in the project file (face, reaches) are along the axis")
    return LandXmlRoute(xy=xy, level_m=level, station_m=stations, sta_start_m=station0, source=source,
                        warnings=tuple(notes))


def read_alignment_landxml(path, name: str | None = None, z_means: str = "axis", profile: str | None = None,
                           name_key: str = "alignment_name", z_key: str = "alignment_z",
                           profile_key: str = "alignment_profile") -> tuple[Alignment, float]:
    """A drive alignment from a LandXML 1.2 file, and its start station.

    Parameters
    ----------
    path : path             The LandXML file (.xml).
    name : str or None      `name` of the <Alignment>; None = the file's only alignment.
    z_means : str           What the profile level is: "axis" or "invert" level. [m]
    profile : str or None   `name` of the <ProfAlign>; None = the alignment's only design profile.
    name_key, z_key, profile_key : str  Project-file keys named in messages.

    Returns
    -------
    (Alignment, float)  The vertices (x = easting, y = northing, v = profile level) [m], and the alignment's
                        staStart: the chainage of the first vertex [m].
    """
    if z_means not in Z_MEANINGS:
        raise InputError(f"{printable(path)}: {z_key} must be one of {listing(Z_MEANINGS)} for a LandXML alignment "
                         f"(its profile gives levels); got {shown(z_means)}")
    route = read_landxml_route(path, name, profile, z_means, name_key, profile_key)
    return (Alignment(xy=route.xy, v=route.level_m, vertical=z_means, source=route.source, warnings=route.warnings),
            route.sta_start_m)
