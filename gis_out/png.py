"""Writing a matplotlib figure to PNG safely (temporary file in the target folder, then an atomic rename), and the
check of the characters drawn against the fonts that draw them.

A name given by the user (a drive, a building, a pipe, a point, the project) may hold characters the figure font
has no glyph for (CJK, emoji); matplotlib draws a box for each and warns once per glyph. `glyph_check` gathers the
characters every text of the figures drawn inside it lacks, silences matplotlib's warnings, and gives one
UserWarning at its end listing them with their code points.
"""
from __future__ import annotations

import functools
import inspect
import os
import uuid
import warnings
from contextlib import contextmanager
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402  (after choosing the backend)
from matplotlib import font_manager  # noqa: E402
from matplotlib.font_manager import FontProperties  # noqa: E402
from matplotlib.text import Text  # noqa: E402

#: matplotlib's own warning for each glyph its font lacks; replaced by the one line of `glyph_check`.
MATPLOTLIB_GLYPH_WARNING = r"Glyph \d+ \(.*\) missing from font"
#: Characters that lay text out rather than being drawn.
LAYOUT_CHARACTERS = frozenset("\n")

_CHECKS: list[dict] = []  # the glyph checks open, innermost last: missing character -> names of the fonts lacking it


def save_png(fig, path, dpi: int = 150) -> Path:
    """Write the figure as a PNG through a temporary file beside `path` and an atomic rename; close the figure.

    A failure leaves no partial file and any earlier PNG at `path` untouched. Returns the absolute path written.
    The characters the figure's fonts lack are reported by the `glyph_check` around the call (one of its own when
    there is none).
    """
    final = Path(path).resolve()
    tmp = final.with_name(f".{final.name}.{uuid.uuid4().hex}.tmp")
    try:
        with glyph_check("figure " + final.name):
            note_missing_glyphs(fig)
            fig.savefig(tmp, dpi=dpi, format="png")
        os.replace(tmp, final)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    finally:
        plt.close(fig)
    return final


# ------------------------------------------------------------------------------------------------ the glyphs
def font_files(prop: FontProperties | None = None) -> list:
    """The font files matplotlib draws text of these properties with (each family in turn; the default font when
    none is found), under the current rcParams. Default properties: the figures' font (DejaVu Sans by default)."""
    prop = FontProperties() if prop is None else prop
    files = []
    for family in prop.get_family():
        one = prop.copy()
        one.set_family(family)
        try:
            files.append(font_manager.findfont(one, fallback_to_default=False))
        except ValueError:
            continue
    return files or [font_manager.findfont(prop)]


@functools.lru_cache(maxsize=64)
def _charmap(font_file) -> tuple[str, frozenset[int]]:
    """(family name, code points with a glyph) of one font file."""
    font = font_manager.get_font(font_file)
    return font.family_name, frozenset(font.get_charmap())


@functools.lru_cache(maxsize=64)
def _covered(font_files: tuple) -> frozenset[int]:
    """Code points with a glyph in any of the font files."""
    return frozenset().union(*(_charmap(f)[1] for f in font_files))


def missing_glyphs(texts, prop: FontProperties | None = None) -> list[str]:
    """The characters of the texts that none of the fonts for `prop` has a glyph for, each once, in the order met.

    Parameters
    ----------
    texts : iterable of str    The strings drawn.
    prop : FontProperties      Their font; default: the figures' font under the current rcParams.
    """
    covered = _covered(tuple(font_files(prop)))
    seen = dict.fromkeys(ch for text in texts for ch in str(text))
    return [ch for ch in seen if ch not in LAYOUT_CHARACTERS and ord(ch) not in covered]


def font_names(prop: FontProperties | None = None) -> str:
    """The family names of the fonts for `prop`, joined by ", "."""
    return ", ".join(dict.fromkeys(_charmap(f)[0] for f in font_files(prop)))


def describe_characters(chars) -> str:
    """Characters as "'東' (U+6771), '😀' (U+1F600)"."""
    return ", ".join(f"{ch!r} (U+{ord(ch):04X})" for ch in chars)


def note_missing_glyphs(fig) -> None:
    """Add the characters each visible text of the figure lacks in its own font to the open `glyph_check`s
    (nothing when none is open). Call it where the figure's rcParams apply (inside any rc_context it is drawn in)."""
    if not _CHECKS:
        return
    for text in fig.findobj(lambda a: isinstance(a, Text) and a.get_visible() and a.get_text()):
        prop = text.get_fontproperties()
        for ch in missing_glyphs([text.get_text()], prop):
            _CHECKS[-1].setdefault(ch, set()).add(font_names(prop))


@contextmanager
def glyph_check(what: str):
    """Around drawing figures: silence matplotlib's warning per missing glyph, and at the end give one UserWarning
    naming `what` and listing the characters the fonts lacked (see `note_missing_glyphs`). Checks nest: an inner
    one hands what it found to the outer one, which warns once for all."""
    found: dict = {}
    _CHECKS.append(found)
    try:
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", message=MATPLOTLIB_GLYPH_WARNING)
            yield
    finally:
        _CHECKS.pop()
    if _CHECKS:
        for ch, fonts in found.items():
            _CHECKS[-1].setdefault(ch, set()).update(fonts)
    elif found:
        fonts = ", ".join(sorted(set().union(*found.values())))
        warnings.warn(f"{what}: the font ({fonts}) has no glyph for {describe_characters(found)} in the names "
                      "drawn; they show as boxes", UserWarning, stacklevel=3)


def glyph_checked(draw):
    """Decorate a function that draws a figure and writes it to its argument `path`: the whole drawing runs inside
    one `glyph_check` named after the file, so the characters its fonts lack come as one warning."""
    signature = inspect.signature(draw)

    @functools.wraps(draw)
    def checked(*args, **kwargs):
        path = signature.bind(*args, **kwargs).arguments.get("path", "")
        with glyph_check(f"figure {Path(path).name}"):
            return draw(*args, **kwargs)

    return checked
