"""Default styles for the result layers: one palette table per layer, written as QML and as OGC SLD 1.1 / SE 1.1.

Every styled layer gets one `LayerStyle` (its palette table: one class per value of an integer class field, or one
single symbol). Both style languages are generated from that one table, so they always agree:

- QML, the form QGIS applies when it opens a layer, in the GeoPackage's `layer_styles` table (the convention QGIS
  uses for database styles; see gis-notes §C) and as `<stem>-<layer>.qml` beside the GeoPackage;
- OGC Styled Layer Descriptor 1.1 with Symbology Encoding 1.1, for other clients, in the same table row and as
  `<stem>-<layer>.sld`.

Styled layers: `settlement_bands` by `band`; `buildings` and `building_walls` by damage `category`; `utilities`
and `face_stations` by `status_class`; `route`, `settlement_lines`, `grid`, `points` and `utility_critical_points`
with one symbol each. Other layers get no default style.

Classes match integer fields exactly (`band`, damage `category`, `status_class`), never float ranges. Every class of
a layer's vocabulary gets an entry, whether or not it occurs in the run, and every label starts with the class number
followed by its range or its words, so colour is never the only cue. The palettes are our own. Ordered classes
(settlement bands, damage categories) get lighter-to-darker colours whose CIE lightness falls with the class; the
status classes differ in lightness and hue and also in line width, dash or marker shape. `tests/test_styles.py`
checks every palette under simulated protanopia, deuteranopia and tritanopia (Machado et al. 2009): neighbouring
classes (every pair, for status classes) stay at least `MIN_DELTA_E` apart in CIELAB.

Conventions: settlement positive downward (the project's, `settle.results`); band k holds lower_mm < S <= upper_mm
(`gis_out.contours`). Colours are sRGB "#rrggbb"; sizes are in mm on paper or screen (QML `MM` units), written in SLD
as pixels of 0.28 mm, the standardized rendering pixel of SE 1.1 (OGC 05-077r4; from memory).

References
----------
[M09]  Machado, G. M., Oliveira, M. M. & Fernandes, L. A. F. (2009). A physiologically-based model for simulation of
       color vision deficiency. IEEE Transactions on Visualization and Computer Graphics 15(6), 1291-1298.
       (The colour science itself, with its references, is in `gis_out.colour`.)
[SE]   OGC 05-077r4. Symbology Encoding Implementation Specification 1.1.0; OGC 05-078r4, Styled Layer Descriptor
       profile of the Web Map Service 1.1.0; OGC 04-095, Filter Encoding 1.1.0.
"""
from __future__ import annotations

import contextlib
import os
import sqlite3
import xml.etree.ElementTree as ET
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd
import pyogrio

from settle.assessments import building_damage, face_stations, utilities

from .colour import (  # noqa: F401  (re-exported for the tests and the figures)
    D65_WHITE_XYZ, MACHADO_MATRICES, SRGB_TO_XYZ, cielab_ramp, cielab_to_linear_rgb, delta_e_cie76, hex_to_srgb,
    linear_rgb_to_cielab, linear_to_srgb, machado_cvd_simulation, perceived_cielab, srgb_to_hex, srgb_to_linear,
)
from .contours import check_levels
from .geopackage import read_only_uri, write_text_atomic

# ------------------------------------------------------------------------------------------- palette rules
#: Smallest CIE76 colour difference between neighbouring classes (every pair, for status classes), with normal
#: vision and each simulated dichromacy. A design rule chosen here, not a standard: about four times the
#: just-noticeable difference of about 2.3 (from memory), so that neighbouring classes read as different at a glance.
MIN_DELTA_E = 10.0
#: The settlement-band ramp keeps MIN_DELTA_E between neighbouring bands for up to this many bands (checked in the
#: tests); more bands are drawn, but their neighbours are then told apart mainly by the labels.
MAX_DISTINCT_BANDS = 9


# ------------------------------------------------------------------------------------------------- palette tables
@dataclass(frozen=True)
class Symbol:
    """How one class is drawn. Sizes in mm."""

    kind: str  # "fill" | "line" | "marker"
    colour: str  # "#rrggbb": fill colour, line colour or marker fill
    opacity: float = 1.0  # of the fill, line or marker [0-1]
    width_mm: float = 0.26  # line width, or the outline width of a fill or marker [mm]
    outline: str | None = "#4d4d4d"  # outline colour of fills and markers; None draws no outline
    dash_mm: tuple[float, ...] = ()  # dash, gap, ... of lines (fills: of the outline); () is a solid line [mm]
    filled: bool = True  # fills only: False draws the outline alone
    shape: str = "circle"  # markers: circle | triangle | square | star
    size_mm: float = 2.0  # markers [mm]
    halo_mm: float = 0.0  # lines: a white casing this much wider on each side, drawn underneath [mm]


@dataclass(frozen=True)
class StyleClass:
    """One class of a categorized style: rows whose field equals `value` (None: the field is NULL)."""

    value: int | None
    label: str  # starts with the class number (or the word for NULL), then the range or words
    symbol: Symbol


@dataclass(frozen=True)
class LayerStyle:
    """The palette table of one layer: classes by an integer field, or a single symbol (`field` None)."""

    layer: str
    field: str | None
    classes: tuple[StyleClass, ...]
    title: str  # one line for the style's description


#: Settlement bands, lightest (lowest settlement) to darkest; sampled by `cielab_ramp` for the number of bands.
BAND_RAMP = ("#fff6c4", "#fdd16b", "#f79a3e", "#dd5a4a", "#a83267", "#5c1f6e", "#2a1340")
BAND_OPACITY = 0.8
#: Damage categories 0 to 5 (Burland 1995 degrees of damage), from pale blue through yellow and orange to dark
#: purple; CIE lightness falls with the category.
DAMAGE_COLOURS = ("#eef3f7", "#b3d3e8", "#ecb533", "#dc7428", "#b5305a", "#4d1248")
#: Words of damage categories 0 to 5: those settle.buildings writes in `category_label` for 0 to 4 (for 4,
#: "severe to very severe": that method reads any tensile strain above 0.3 % as category 4, because the published
#: table gives the same limit for 4 and 5), and the Burland (1995) degree of damage for 5, which the method never
#: assigns (methods.md section 5.2 [S]).
DAMAGE_WORDS = tuple(building_damage.CATEGORY_LABELS) + ("very severe",)
NOT_ASSESSED_WORDS = building_damage.NOT_ASSESSED_LABEL
#: Status colours shared by utilities and face stations: fine, caution, beyond the limit.
OK_BLUE, CAUTION_AMBER, BEYOND_CRIMSON = "#2767ad", "#f0a202", "#b3124e"
UTILITY_SYMBOLS = (  # by status_class, in the order of settle.pipelines.STATUSES
    Symbol("line", OK_BLUE, width_mm=0.5),
    Symbol("line", CAUTION_AMBER, width_mm=0.8),
    Symbol("line", BEYOND_CRIMSON, width_mm=1.1),
    Symbol("line", "#8c8c8c", width_mm=0.5, dash_mm=(2.0, 1.5)),
    Symbol("line", "#1a1a1a", width_mm=0.8, dash_mm=(4.0, 1.0, 1.0, 1.0)),
)
FACE_SYMBOLS = (  # by status_class, in the order of settle.face_stations.STATUSES
    Symbol("marker", OK_BLUE, shape="circle", size_mm=2.2, outline="#ffffff", width_mm=0.2),
    Symbol("marker", CAUTION_AMBER, shape="triangle", size_mm=3.0, outline="#1a1a1a", width_mm=0.2),
    Symbol("marker", BEYOND_CRIMSON, shape="square", size_mm=3.0, outline="#ffffff", width_mm=0.2),
)
SINGLE_SYMBOLS = {
    "route": ("tunnel axis", Symbol("line", "#111111", width_mm=0.9, halo_mm=0.4)),
    "settlement_lines": ("settlement contour", Symbol("line", "#303030", width_mm=0.25)),
    "grid": ("grid node", Symbol("marker", "#6b6b6b", shape="circle", size_mm=0.8, outline=None)),
    "route_reaches": ("reach of a drive", Symbol("line", "#5a5a5a", width_mm=0.5)),
    "route_profile": ("route profile point", Symbol("marker", "#111111", shape="circle", size_mm=0.5, outline=None)),
    "points": ("reporting point", Symbol("marker", "#111111", shape="circle", size_mm=1.8, outline="#ffffff",
                                         width_mm=0.2)),
    "utility_critical_points": ("greatest demand on a pipe", Symbol("marker", "#1a1a1a", shape="star", size_mm=2.6,
                                                                    outline="#ffffff", width_mm=0.2)),
}
_BUILDING_OUTLINE = "#3c3c3c"


def band_colours(n: int) -> list[str]:
    """Fill colours of `n` settlement bands, band 0 first (lightest). See MAX_DISTINCT_BANDS."""
    return cielab_ramp(BAND_RAMP, n)


def _class_values(frame, layer: str, field: str, nullable: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """The integer class field of a layer as (values, is_null); ValueError when missing or not whole numbers."""
    if field not in frame.columns:
        raise ValueError(f"layer {layer!r}: field {field!r} is missing; the style colours the layer by it")
    column = pd.Series(frame[field])
    null = column.isna().to_numpy()
    if null.any() and not nullable:
        raise ValueError(f"layer {layer!r}: field {field!r} holds NULL in {int(null.sum())} rows")
    try:
        values = pd.to_numeric(column[~null]).to_numpy(dtype=float)
    except (TypeError, ValueError):
        raise ValueError(f"layer {layer!r}: field {field!r} must hold whole numbers; got "
                         f"{column[~null].head(3).tolist()}") from None
    if not np.all(np.isfinite(values) & (values == np.round(values))):
        raise ValueError(f"layer {layer!r}: field {field!r} must hold whole numbers; got "
                         f"{values[:3].tolist()}")
    out = np.full(len(column), -1, dtype=np.int64)
    out[~null] = values.astype(np.int64)
    return out, null


def _check_vocabulary(layer: str, field: str, values: np.ndarray, allowed) -> None:
    unknown = sorted(set(values.tolist()) - set(allowed))
    if unknown:
        raise ValueError(f"layer {layer!r}: field {field!r} holds {unknown}, outside the classes {sorted(allowed)}")


def band_label(band: int, lower_mm: float, upper_mm: float | None) -> str:
    """E.g. "band 0: 1-2 mm"; the open top band (upper_mm None) reads "band 5: ≥ 20 mm"."""
    if upper_mm is None:
        return f"band {band}: \u2265 {lower_mm:g} mm"
    return f"band {band}: {lower_mm:g}-{upper_mm:g} mm"


def band_style(frame, levels_mm=None, layer: str = "settlement_bands") -> LayerStyle | None:
    """Palette table of `settlement_bands` (or `settlement_bands_p95`, drawn alike), by the integer field `band`.

    Parameters
    ----------
    frame : GeoDataFrame        The layer (fields band, lower_mm, upper_mm).
    levels_mm : sequence, optional
                                The contour levels the bands were cut at [mm]. With them every band of the run's
                                vocabulary (one per level) gets an entry and a colour that does not depend on which
                                bands occur. Without them the bands are those in the frame, labelled from their
                                lower_mm and upper_mm, the highest one open above.

    Returns
    -------
    LayerStyle, or None when there are no levels and no rows (nothing to label).
    """
    values, _ = _class_values(frame, layer, "band")
    if levels_mm is not None:
        levels = check_levels(levels_mm)
        n = len(levels)
        _check_vocabulary(layer, "band", values, range(n))
        lower = pd.to_numeric(frame["lower_mm"]).to_numpy(dtype=float) if len(frame) else np.empty(0)
        off = ~np.isclose(lower, levels[values], rtol=1e-9, atol=1e-9) if len(values) else np.zeros(0, bool)
        if off.any():
            k = int(np.flatnonzero(off)[0])
            raise ValueError(f"layer {layer!r}: band {values[k]} starts at {lower[k]:g} mm, not at the level "
                             f"{levels[values[k]]:g} mm given for it")
        bounds = {k: (float(levels[k]), float(levels[k + 1]) if k + 1 < n else None) for k in range(n)}
    else:
        if not len(values):
            return None
        if values.min() < 0:
            raise ValueError(f"layer {layer!r}: field 'band' holds {values.min()}; bands are numbered from 0")
        lower = pd.to_numeric(frame["lower_mm"]).to_numpy(dtype=float)
        upper = pd.to_numeric(frame["upper_mm"]).to_numpy(dtype=float)
        top = int(values.max())
        bounds = {}
        for k, lo, hi in zip(values.tolist(), lower.tolist(), upper.tolist()):
            bound = (lo, None if k == top else hi)
            if bounds.setdefault(k, bound) != bound:
                raise ValueError(f"layer {layer!r}: band {k} has two ranges, {bounds[k]} and {bound} mm")
        n = top + 1
    colours = band_colours(n)
    classes = tuple(StyleClass(k, band_label(k, *bounds[k]),
                               Symbol("fill", colours[k], opacity=BAND_OPACITY, width_mm=0.2, outline="#5a5a5a"))
                    for k in sorted(bounds))
    what = "95th percentile settlement bands" if layer.endswith("_p95") else "settlement bands"
    return LayerStyle(layer, "band", classes, f"{what}, by band number (settlement positive downward)")


def damage_style(frame, layer: str = "buildings") -> LayerStyle:
    """Palette table of `buildings` (fills) or `building_walls` (lines), by the integer field `category`.

    Classes 0 to 5, labelled "<category> <words>" (DAMAGE_WORDS), and NULL ("not assessed": outline or line
    dashed, no fill). When the layer has the text field `category_label`, every row must carry the words of its
    category, so the legend says what the attribute table says.
    """
    values, null = _class_values(frame, layer, "category", nullable=True)
    _check_vocabulary(layer, "category", values[~null], range(len(DAMAGE_WORDS)))
    if "category_label" in frame.columns and len(values):
        text = pd.Series(frame["category_label"]).astype(str).to_numpy()
        expected = np.where(null, NOT_ASSESSED_WORDS, np.asarray(DAMAGE_WORDS, dtype=object)[np.where(null, 0, values)])
        wrong = np.flatnonzero(text != expected)
        if len(wrong):
            k = int(wrong[0])
            raise ValueError(f"layer {layer!r}: row {k} has category_label {text[k]!r} but category "
                             f"{'NULL' if null[k] else values[k]} ({expected[k]!r})")
    if layer == "building_walls":
        looks = [Symbol("line", c, width_mm=0.8) for c in DAMAGE_COLOURS]
        missing = Symbol("line", _BUILDING_OUTLINE, width_mm=0.8, dash_mm=(1.5, 1.0))
        title = "walls assessed at stage 2, by damage category (Burland 1995)"
    else:
        looks = [Symbol("fill", c, width_mm=0.3, outline=_BUILDING_OUTLINE) for c in DAMAGE_COLOURS]
        missing = Symbol("fill", "#ffffff", filled=False, width_mm=0.4, outline=_BUILDING_OUTLINE, dash_mm=(1.5, 1.0))
        title = "buildings, by damage category (Burland 1995)"
    classes = [StyleClass(k, f"{k} {words}", look) for k, (words, look) in enumerate(zip(DAMAGE_WORDS, looks))]
    classes.append(StyleClass(None, NOT_ASSESSED_WORDS, missing))
    return LayerStyle(layer, "category", tuple(classes), title)


def status_style(frame, layer: str, words, symbols, title: str) -> LayerStyle:
    """Palette table of a layer classed by the integer field `status_class` (index into `words`).

    When the layer also has the text field `status`, every row must carry the words of its class.
    """
    values, _ = _class_values(frame, layer, "status_class")
    _check_vocabulary(layer, "status_class", values, range(len(words)))
    if "status" in frame.columns and len(values):
        text = pd.Series(frame["status"]).astype(str).to_numpy()
        wrong = np.flatnonzero(text != np.asarray(words, dtype=object)[values])
        if len(wrong):
            k = int(wrong[0])
            raise ValueError(f"layer {layer!r}: row {k} has status {text[k]!r} but status_class {values[k]} "
                             f"({words[values[k]]!r})")
    classes = tuple(StyleClass(k, f"{k} {w}", s) for k, (w, s) in enumerate(zip(words, symbols)))
    return LayerStyle(layer, "status_class", classes, title)


def layer_style(name: str, frame, levels_mm=None) -> LayerStyle | None:
    """The palette table of a result layer, or None for a layer with no default style."""
    if name in ("settlement_bands", "settlement_bands_p95"):
        return band_style(frame, levels_mm, name)
    if name in ("buildings", "building_walls"):
        return damage_style(frame, name)
    if name == "utilities":
        return status_style(frame, name, utilities.STATUSES, UTILITY_SYMBOLS, "buried utilities, by status")
    if name == "face_stations":
        return status_style(frame, name, face_stations.STATUSES, FACE_SYMBOLS,
                            "face-check stations, by support window status")
    if name == "readings":
        from settle.monitoring.fitting import STATUS_AMBER, STATUS_CLEAR, STATUS_RED

        return status_style(frame, name, (STATUS_CLEAR, STATUS_AMBER, STATUS_RED), FACE_SYMBOLS,
                            "monitoring points, latest reading against the trigger levels")
    if name in SINGLE_SYMBOLS:
        label, symbol = SINGLE_SYMBOLS[name]
        return LayerStyle(name, None, (StyleClass(None, label, symbol),), label)
    return None


def layer_styles(layers: dict, levels_mm=None) -> dict[str, LayerStyle]:
    """Palette tables of the styled layers present in `layers` (name -> frame), in the order given."""
    found = {name: layer_style(name, frame, levels_mm) for name, frame in layers.items()}
    return {name: style for name, style in found.items() if style is not None}


# ------------------------------------------------------------------------------------------------------------ QML
_QML_DOCTYPE = "<!DOCTYPE qgis PUBLIC 'http://mrcc.com/qgis.dtd' 'SYSTEM'>"
_QML_SHAPES = {"circle": "circle", "triangle": "triangle", "square": "square", "star": "star"}
_SLD_SHAPES = {"circle": "circle", "triangle": "triangle", "square": "square", "star": "star"}


def _qml_colour(hex_colour: str | None, opacity: float = 1.0) -> str:
    if hex_colour is None:
        return "0,0,0,0"
    r, g, b = (int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))
    return f"{r},{g},{b},{int(round(opacity * 255))}"


def _qml_layers(symbol: Symbol) -> list[tuple[str, dict]]:
    """(symbol layer class, properties) of a symbol, bottom first."""
    dash = ";".join(f"{d:g}" for d in symbol.dash_mm)
    if symbol.kind == "fill":
        return [("SimpleFill", {
            "color": _qml_colour(symbol.colour, symbol.opacity), "style": "solid" if symbol.filled else "no",
            "outline_color": _qml_colour(symbol.outline), "outline_style": "dash" if symbol.dash_mm else "solid",
            "outline_width": f"{symbol.width_mm:g}", "outline_width_unit": "MM", "joinstyle": "bevel"})]
    if symbol.kind == "line":
        def line(colour, width):
            return ("SimpleLine", {
                "line_color": _qml_colour(colour, symbol.opacity), "line_width": f"{width:g}",
                "line_width_unit": "MM", "line_style": "solid", "capstyle": "round", "joinstyle": "round",
                "use_custom_dash": "1" if symbol.dash_mm else "0", "customdash": dash or "5;2",
                "customdash_unit": "MM"})
        under = [line("#ffffff", symbol.width_mm + 2 * symbol.halo_mm)] if symbol.halo_mm > 0 else []
        return under + [line(symbol.colour, symbol.width_mm)]
    if symbol.kind == "marker":
        return [("SimpleMarker", {
            "name": _QML_SHAPES[symbol.shape], "color": _qml_colour(symbol.colour, symbol.opacity),
            "outline_color": _qml_colour(symbol.outline), "outline_style": "solid" if symbol.outline else "no",
            "outline_width": f"{symbol.width_mm:g}", "outline_width_unit": "MM", "size": f"{symbol.size_mm:g}",
            "size_unit": "MM"})]
    raise ValueError(f"symbol kind must be fill, line or marker; got {symbol.kind!r}")


def _qml_symbol(parent, name: str, symbol: Symbol) -> None:
    el = ET.SubElement(parent, "symbol", type=symbol.kind, name=name, alpha="1", clip_to_extent="1", force_rhr="0")
    for cls, props in _qml_layers(symbol):
        layer = ET.SubElement(el, "layer", {"class": cls, "enabled": "1", "locked": "0", "pass": "0"})
        options = ET.SubElement(layer, "Option", type="Map")  # the form QGIS >= 3.22 writes
        for k, v in props.items():
            ET.SubElement(options, "Option", name=k, type="QString", value=v)
        for k, v in props.items():  # the older form, which QGIS still reads
            ET.SubElement(layer, "prop", k=k, v=v)


def qml(style: LayerStyle) -> str:
    """The style as a QGIS QML document (categorized by the integer field, or a single symbol)."""
    root = ET.Element("qgis", version="3.22.0", styleCategories="Symbology")
    common = {"symbollevels": "0", "enableorderby": "0", "forceraster": "0"}
    if style.field is None:
        renderer = ET.SubElement(root, "renderer-v2", type="singleSymbol", **common)
        symbols = ET.SubElement(renderer, "symbols")
        _qml_symbol(symbols, "0", style.classes[0].symbol)
    else:
        renderer = ET.SubElement(root, "renderer-v2", type="categorizedSymbol", attr=style.field, **common)
        categories = ET.SubElement(renderer, "categories")
        symbols = ET.SubElement(renderer, "symbols")
        for i, c in enumerate(style.classes):
            # An empty value is QGIS's "all other values" category, which also takes NULL.
            ET.SubElement(categories, "category", symbol=str(i), value="" if c.value is None else str(c.value),
                          label=c.label, render="true")
            _qml_symbol(symbols, str(i), c.symbol)
    ET.indent(root, space=" ")
    return _QML_DOCTYPE + "\n" + ET.tostring(root, encoding="unicode") + "\n"


# ------------------------------------------------------------------------------------------------------------ SLD
SLD_NS, SE_NS, OGC_NS = "http://www.opengis.net/sld", "http://www.opengis.net/se", "http://www.opengis.net/ogc"
XLINK_NS, XSI_NS = "http://www.w3.org/1999/xlink", "http://www.w3.org/2001/XMLSchema-instance"
SLD_SCHEMA = "http://www.opengis.net/sld http://schemas.opengis.net/sld/1.1.0/StyledLayerDescriptor.xsd"
PIXEL_MM = 0.28  # the standardized rendering pixel of SE 1.1 (OGC 05-077r4; from memory) [mm]
for _prefix, _uri in (("", SLD_NS), ("se", SE_NS), ("ogc", OGC_NS), ("xlink", XLINK_NS), ("xsi", XSI_NS)):
    ET.register_namespace(_prefix, _uri)


def _se(parent, tag: str, text: str | None = None, **attrs):
    el = ET.SubElement(parent, f"{{{SE_NS}}}{tag}", attrs)
    if text is not None:
        el.text = text
    return el


def _px(mm: float) -> str:
    return f"{mm / PIXEL_MM:.2f}"


def _sld_params(parent, tag: str, params: dict) -> None:
    el = _se(parent, tag)
    for k, v in params.items():
        _se(el, "SvgParameter", v, name=k)


def _sld_stroke(colour: str, width_mm: float, opacity: float = 1.0, dash_mm=()) -> dict:
    params = {"stroke": colour, "stroke-opacity": f"{opacity:g}", "stroke-width": _px(width_mm),
              "stroke-linejoin": "round", "stroke-linecap": "round"}
    if dash_mm:
        params["stroke-dasharray"] = " ".join(_px(d) for d in dash_mm)
    return params


def _sld_symbolizers(rule, symbol: Symbol) -> None:
    if symbol.kind == "fill":
        sym = _se(rule, "PolygonSymbolizer")
        if symbol.filled:
            _sld_params(sym, "Fill", {"fill": symbol.colour, "fill-opacity": f"{symbol.opacity:g}"})
        if symbol.outline:
            _sld_params(sym, "Stroke", _sld_stroke(symbol.outline, symbol.width_mm, dash_mm=symbol.dash_mm))
    elif symbol.kind == "line":
        if symbol.halo_mm > 0:
            _sld_params(_se(rule, "LineSymbolizer"), "Stroke",
                        _sld_stroke("#ffffff", symbol.width_mm + 2 * symbol.halo_mm, symbol.opacity))
        _sld_params(_se(rule, "LineSymbolizer"), "Stroke",
                    _sld_stroke(symbol.colour, symbol.width_mm, symbol.opacity, symbol.dash_mm))
    elif symbol.kind == "marker":
        graphic = _se(_se(rule, "PointSymbolizer"), "Graphic")
        mark = _se(graphic, "Mark")
        _se(mark, "WellKnownName", _SLD_SHAPES[symbol.shape])
        _sld_params(mark, "Fill", {"fill": symbol.colour, "fill-opacity": f"{symbol.opacity:g}"})
        if symbol.outline:
            _sld_params(mark, "Stroke", _sld_stroke(symbol.outline, symbol.width_mm))
        _se(graphic, "Size", _px(symbol.size_mm))
    else:
        raise ValueError(f"symbol kind must be fill, line or marker; got {symbol.kind!r}")


def _sld_filter(rule, field: str, value: int | None) -> None:
    flt = ET.SubElement(rule, f"{{{OGC_NS}}}Filter")
    if value is None:
        test = ET.SubElement(flt, f"{{{OGC_NS}}}PropertyIsNull")
        ET.SubElement(test, f"{{{OGC_NS}}}PropertyName").text = field
        return
    test = ET.SubElement(flt, f"{{{OGC_NS}}}PropertyIsEqualTo")
    ET.SubElement(test, f"{{{OGC_NS}}}PropertyName").text = field
    ET.SubElement(test, f"{{{OGC_NS}}}Literal").text = str(int(value))


def sld(style: LayerStyle) -> str:
    """The style as an OGC SLD 1.1.0 document with SE 1.1 symbolizers; one rule per class, filtered with
    ogc:PropertyIsEqualTo on the integer field (ogc:PropertyIsNull for the NULL class)."""
    root = ET.Element(f"{{{SLD_NS}}}StyledLayerDescriptor", {"version": "1.1.0",
                                                             f"{{{XSI_NS}}}schemaLocation": SLD_SCHEMA})
    named = ET.SubElement(root, f"{{{SLD_NS}}}NamedLayer")
    _se(named, "Name", style.layer)
    user = ET.SubElement(named, f"{{{SLD_NS}}}UserStyle")
    _se(user, "Name", style.layer)
    _se(_se(user, "Description"), "Title", style.title)
    fts = _se(user, "FeatureTypeStyle")
    for c in style.classes:
        rule = _se(fts, "Rule")
        _se(rule, "Name", c.label)
        _se(_se(rule, "Description"), "Title", c.label)
        if style.field is not None:
            _sld_filter(rule, style.field, c.value)
        _sld_symbolizers(rule, c.symbol)
    ET.indent(root, space=" ")
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(root, encoding="unicode") + "\n"


# ---------------------------------------------------------------------------------------------------- the writers
STYLE_TABLE = "layer_styles"
STYLE_NAME = "default"
#: update_time of the style rows: fixed, not the time of writing, so that a run's outputs are reproducible (issue
#: 7). It is not an edit time; QGIS picks the row by useAsDefault before it looks at update_time.
FIXED_UPDATE_TIME = pd.Timestamp("1970-01-01T00:00:00Z")
STYLE_COLUMNS = ("f_table_catalog", "f_table_schema", "f_table_name", "f_geometry_column", "styleName", "styleQML",
                 "styleSLD", "useAsDefault", "description", "owner", "ui", "update_time")


def _geometry_columns(path) -> dict[str, str]:
    """Feature table -> geometry column, from gpkg_geometry_columns (sqlite3, read-only)."""
    with contextlib.closing(sqlite3.connect(read_only_uri(path), uri=True)) as con:
        return dict(con.execute("SELECT table_name, column_name FROM gpkg_geometry_columns").fetchall())


def _kept_style_rows(path, replaced) -> pd.DataFrame | None:
    """Rows of an existing layer_styles table for layers not in `replaced`; None when there is no table."""
    if STYLE_TABLE not in {name for name, _ in pyogrio.list_layers(path)}:
        return None
    old = pyogrio.read_dataframe(path, layer=STYLE_TABLE, read_geometry=False)
    return old[~old["f_table_name"].isin(list(replaced))]


def write_styles(gpkg_path, layers: dict, *, levels_mm=None, update_time=FIXED_UPDATE_TIME) -> list[str]:
    """Write the default style of every styled layer present into the GeoPackage's `layer_styles` table.

    Parameters
    ----------
    gpkg_path : str or Path   A GeoPackage that already holds the layers (e.g. the temporary file that
                              `write_geopackage` hands to its `extra` hook).
    layers : dict             Layer name -> GeoDataFrame, as written; layers with no default style are skipped.
    levels_mm : sequence, optional
                              The contour levels of the run [mm]; see `band_style`. Pass them, so that every band
                              has an entry and a fixed colour.
    update_time : pandas.Timestamp, optional
                              Time zone aware; stored in UTC. Default FIXED_UPDATE_TIME (reproducible output).

    Returns
    -------
    list of str  The layers styled.

    Notes
    -----
    One row per styled layer, as QGIS looks for it (gis-notes §C): f_table_schema '' (not NULL), f_geometry_column
    the layer's geometry column read from gpkg_geometry_columns, styleName "default", useAsDefault true, styleQML
    and styleSLD from the same palette table. The table is written through GDAL with FID "id", so it is registered
    in gpkg_contents as an 'attributes' table and the file stays a valid GeoPackage. Rows of an existing table for
    other layers are kept; those for the layers styled now are replaced.

    Raises
    ------
    ValueError  When a styled layer is not in the file, lacks its class field, holds a class outside its
                vocabulary, or `update_time` has no time zone.
    """
    path = os.fspath(gpkg_path)
    styles = layer_styles(layers, levels_mm)
    if not styles:
        return []
    stamp = pd.Timestamp(update_time)
    if stamp.tzinfo is None:
        raise ValueError(f"update_time must carry a time zone (GeoPackage DATETIME is UTC); got {update_time!r}")
    geometry_columns = _geometry_columns(path)
    rows = []
    for name, style in styles.items():
        if name not in geometry_columns:
            raise ValueError(f"{path}: layer {name!r} is not a feature table of the file; write the layers first")
        rows.append({"f_table_catalog": "", "f_table_schema": "", "f_table_name": name,
                     "f_geometry_column": geometry_columns[name], "styleName": STYLE_NAME,
                     "styleQML": qml(style), "styleSLD": sld(style), "useAsDefault": True,
                     "description": f"settle default style: {style.title}", "owner": "", "ui": None,
                     "update_time": stamp.tz_convert("UTC")})
    table = pd.DataFrame(rows, columns=list(STYLE_COLUMNS))
    kept = _kept_style_rows(path, styles)
    if kept is not None and len(kept):
        table = pd.concat([kept[list(STYLE_COLUMNS)], table], ignore_index=True)
    table["useAsDefault"] = table["useAsDefault"].astype(bool)
    table["update_time"] = pd.to_datetime(table["update_time"], utc=True)
    table["ui"] = table["ui"].astype(object)
    pyogrio.write_dataframe(table, path, layer=STYLE_TABLE, driver="GPKG", layer_options={"FID": "id"})
    return list(styles)


def styles_hook(layers: dict, levels_mm=None) -> Callable[[str], None]:
    """`write_styles` for these layers as the `extra` hook of `write_geopackage` (called with the temporary file)."""
    def hook(path: str) -> None:
        write_styles(path, layers, levels_mm=levels_mm)
    return hook


def write_style_files(folder, stem: str, layers: dict, *, levels_mm=None) -> list[Path]:
    """Write `<stem>-<layer>.qml` and `<stem>-<layer>.sld` in `folder` for every styled layer present.

    Each file is written safely (temporary file, flush, atomic rename; `write_text_atomic`). Files of layers absent
    from `layers` are neither written nor removed.

    Parameters
    ----------
    folder : str or Path   Existing folder, normally the GeoPackage's.
    stem : str             File name stem, normally the GeoPackage's name without ".gpkg".
    layers : dict          Layer name -> GeoDataFrame.
    levels_mm : sequence, optional   The contour levels of the run [mm]; see `band_style`.

    Returns
    -------
    list of Path  The files written, .qml then .sld per layer.
    """
    if not isinstance(stem, str) or not stem or os.sep in stem or (os.altsep and os.altsep in stem):
        raise ValueError(f"stem must be a file name without folders; got {stem!r}")
    written = []
    for name, style in layer_styles(layers, levels_mm).items():
        written.append(write_text_atomic(Path(folder) / f"{stem}-{name}.qml", qml(style)))
        written.append(write_text_atomic(Path(folder) / f"{stem}-{name}.sld", sld(style)))
    return written
