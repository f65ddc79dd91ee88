"""Page layout of the report: blocks of text, tables and figures laid out on pages, with a header and a footer on
every page (document number, revision, "page k of N").

The text pages are A4 portrait. Each figure has a landscape page of its own, A4 or A3 (`[report] paper`): the figure
is drawn at the size of the page's image area (`FIGURE_AREA_IN`), so its text prints at its nominal size.

Pages are laid out twice: the first pass counts them, so that every footer can say "page k of N"; the layout is
deterministic, so the second pass puts every block on the same page.
"""
from __future__ import annotations

import os
import textwrap
import uuid
from dataclasses import dataclass, field
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402  (after choosing the backend)

from .png import note_missing_glyphs  # noqa: E402

A4 = (8.27, 11.69)  # portrait [in]
PAGES_LANDSCAPE = {"A4": (11.69, 8.27), "A3": (16.54, 11.69)}  # the figure pages [in]
MARGIN_IN = 0.7
TEXT_PT, MONO_PT = 9.0, 7.0
WRAP_CHARS = 100  # characters per line of 9 pt text on the A4 text width
MONO_CHARS = 116  # characters per line of 7 pt Courier on the A4 text width
#: The image area of a figure page, below its caption and above its footer (width, height) [in]; the figures are
#: drawn at this size.
FIGURE_AREA_IN = {paper: (w - 2 * MARGIN_IN, h - 2.05) for paper, (w, h) in PAGES_LANDSCAPE.items()}
FOOTER_PT = 7.5


@dataclass
class Block:
    """One piece of the report: kind is "title", "heading", "subheading", "text", "mono" (fixed-width lines),
    "image" (a PNG with its caption) or "break" (a new page)."""

    kind: str
    text: str = ""
    lines: list[str] = field(default_factory=list)
    image: Path | None = None


@dataclass
class PageMarks:
    """What every page carries: the header (the report's title and run), the footer's left part (document number
    and revision, or the project) and its middle (the caution in a few words)."""

    header: str
    footer: str
    caution: str = "Greenfield estimates for planning: see section 4."


def core_fonts_suffice(blocks: list[Block], marks: PageMarks) -> bool:
    """Whether all the report's text is in Windows-1252, so the PDF core fonts can set it."""
    text = "\n".join([b.text for b in blocks] + [line for b in blocks for line in b.lines]
                     + [marks.header, marks.footer, marks.caution])
    try:
        text.encode("cp1252")
    except UnicodeEncodeError:
        return False
    return True


class Renderer:
    """Lays the blocks out on pages with fig.text, top down. `pdf` None counts the pages without writing them."""

    def __init__(self, pdf, marks: PageMarks, pages: int | None = None, paper: str = "A4",
                 check_glyphs: bool = False):
        self.pdf, self.marks, self.pages, self.paper = pdf, marks, pages, paper
        self.check_glyphs = check_glyphs
        self.fig = None
        self.page = 0
        self.y = 0.0  # inches from the top of the page

    def _start(self, size=A4):
        self._finish()
        self.fig = plt.figure(figsize=size)
        self.page += 1
        w, h = size
        grey = {"fontsize": FOOTER_PT, "color": "0.35", "weight": "medium", "parse_math": False}
        self.fig.text(MARGIN_IN / w, 1 - 0.4 / h, self.marks.header, **grey)
        of = f"page {self.page} of {self.pages}" if self.pages else f"page {self.page}"
        self.fig.text(1 - MARGIN_IN / w, 0.4 / h, of, ha="right", **grey)
        self.fig.text(MARGIN_IN / w, 0.4 / h, self.marks.footer, **grey)
        self.fig.text(0.5, 0.4 / h, self.marks.caution, ha="center", **grey)
        self.y = 0.8

    def _finish(self):
        if self.fig is not None:
            if self.pdf is not None:
                if self.check_glyphs:
                    note_missing_glyphs(self.fig)
                self.pdf.savefig(self.fig)
            plt.close(self.fig)
            self.fig = None

    def _line(self, text, size, family="sans-serif", weight="medium", gap=1.3, colour="k"):
        step = size * gap / 72.0
        if self.fig is None or self.y + step > A4[1] - 0.8:
            self._start()
        self.y += step
        if self.pdf is None:
            return  # counting pages: where the line goes is all that matters
        w, h = self.fig.get_size_inches()
        self.fig.text(MARGIN_IN / w, 1 - self.y / h, text, fontsize=size, family=family, weight=weight,
                      color=colour, va="baseline", parse_math=False)

    def render(self, blocks: list[Block]) -> int:
        """Lay out every block; the number of pages."""
        for b in blocks:
            if b.kind == "break":
                self._finish()
            elif b.kind == "title":
                self._line(b.text, 18, weight="bold", gap=1.6)
                self.y += 0.08
            elif b.kind == "heading":
                if self.fig is not None and self.y > A4[1] - 2.0:
                    self._finish()  # keep a heading with what follows
                self.y += 0.1
                self._line(b.text, 14, weight="bold", gap=1.6)
            elif b.kind == "subheading":
                if self.fig is not None and self.y > A4[1] - 2.0:
                    self._finish()  # keep a subheading with what follows
                self.y += 0.08
                self._line(b.text, 10.5, weight="bold", gap=1.5)
            elif b.kind == "text":
                indent = "  " if b.text.startswith("- ") else ""
                for line in textwrap.wrap(b.text, WRAP_CHARS, subsequent_indent=indent) or [""]:
                    self._line(line, TEXT_PT)
                self.y += 0.05
            elif b.kind == "mono":
                self._mono(b.lines)
            elif b.kind == "image":
                self._image(b)
        self._finish()
        return self.page

    def _mono(self, lines: list[str]):
        """Fixed-width lines; a table (a header and a rule of dashes above its rows) that runs onto the next page
        repeats its header there."""
        head = lines[:2] if len(lines) > 2 and set(lines[1]) == {"-"} else []
        step = MONO_PT * 1.25 / 72.0
        if head and self.fig is not None and self.y + 3 * step > A4[1] - 0.8:
            self._finish()  # a table's header, its rule and its first row stay together
        for k, line in enumerate(lines):
            if head and k >= 2 and self.fig is not None and self.y + step > A4[1] - 0.8:
                self._start()
                for h in head:
                    self._line(h, MONO_PT, family="monospace", gap=1.25)
            self._line(line, MONO_PT, family="monospace", gap=1.25)
        self.y += 0.08

    def _image(self, b: Block):
        size = PAGES_LANDSCAPE[self.paper]
        self._start(size)
        if self.pdf is None:
            self._finish()  # counting pages: the figure's page is done
            return
        img = plt.imread(str(b.image))
        if img.ndim == 3 and img.shape[2] == 4:
            img = img[..., :3]  # the figures are drawn on white: no transparency to keep
        w, h = size
        caption = textwrap.wrap(b.text, int(0.9 * WRAP_CHARS * (w - 2 * MARGIN_IN) / (A4[0] - 2 * MARGIN_IN)))  # bold
        for k, line in enumerate(caption[:3]):
            self.fig.text(MARGIN_IN / w, 1 - (0.8 + 0.17 * k) / h, line, fontsize=9, weight="bold", parse_math=False)
        area_w, area_h = FIGURE_AREA_IN[self.paper]
        ax = self.fig.add_axes([MARGIN_IN / w, 0.75 / h, area_w / w, area_h / h])
        ax.imshow(img, interpolation="none")  # the pixels as drawn, at full resolution
        ax.set_axis_off()
        self._finish()


def atomic_pdf(path: Path, draw) -> Path:
    """Write a PDF through a temporary file in its folder and an atomic rename."""
    tmp = path.with_name(f".{path.name}.{uuid.uuid4().hex}.tmp")
    try:
        draw(tmp)
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path
