"""Image statistics of the report's pages, and their reference for tests/test_report_pages.py.

Every page of the demo report is rendered to pixels (pypdfium2, the PDFium renderer) and described by a few numbers:
the share of the page that carries ink (darker than near-white), the share in colour (channels apart by more than a
small margin), and the ink share in each cell of a 3 x 3 grid. A figure that goes blank, loses a layer, changes its
colours or moves its content changes these numbers by more than the tolerance of the test; small changes of text or
anti-aliasing do not.

    .venv/bin/python -m tests.report_pages --write     # after an intended change of the figures: new reference

The reference is written from the demo site's report (demo_site/ostrey.toml, no run date) into REFERENCE.
"""
from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

REFERENCE = Path(__file__).resolve().parent / "data" / "report_pages.json"
DEMO = Path(__file__).resolve().parent.parent / "demo_site" / "ostrey.toml"
SCALE = 0.5  # rendering scale: 36 pixels per inch
INK_BELOW = 0.9  # a pixel whose darkest channel is below this (0 black, 1 white) carries ink
COLOUR_SPREAD = 0.15  # a pixel whose channels differ by more than this is in colour
GRID = 3


def page_statistics(pdf: Path) -> list[dict]:
    """Per page: its size in points, ink share, colour share and ink share per grid cell (row by row)."""
    import pypdfium2 as pdfium

    out = []
    document = pdfium.PdfDocument(str(pdf))
    try:
        for page in document:
            width, height = page.get_size()
            image = np.asarray(page.render(scale=SCALE).to_pil().convert("RGB"), dtype=float) / 255.0
            ink = image.min(axis=2) < INK_BELOW
            colour = (image.max(axis=2) - image.min(axis=2)) > COLOUR_SPREAD
            rows = np.array_split(np.arange(ink.shape[0]), GRID)
            cols = np.array_split(np.arange(ink.shape[1]), GRID)
            grid = [float(ink[np.ix_(r, c)].mean()) for r in rows for c in cols]
            out.append({"size_pt": [round(width, 1), round(height, 1)], "ink": float(ink.mean()),
                        "colour": float(colour.mean()), "grid_ink": grid})
    finally:
        document.close()
    return out


def demo_report(folder: Path) -> Path:
    """The demo site's report, written by `settle run --report` into `folder`."""
    done = subprocess.run([sys.executable, "-m", "settle", "run", str(DEMO), "--out", str(folder), "--report",
                           "--quiet"], capture_output=True, text=True)
    if done.returncode != 0:
        raise RuntimeError(done.stderr)
    return folder / "ostrey-report.pdf"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--write", action="store_true", help="write the reference from the demo report")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        stats = page_statistics(demo_report(Path(tmp) / "out"))
    if args.write:
        REFERENCE.write_text(json.dumps(stats, indent=1) + "\n")
        print(f"wrote {REFERENCE} ({len(stats)} pages)")
    else:
        print(json.dumps(stats, indent=1))


if __name__ == "__main__":
    main()
