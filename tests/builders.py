"""Small projects built in code for the engine tests (no files), and the demo site run as a user runs it."""
import subprocess
import sys
from pathlib import Path

import numpy as np

from settle.inputs.model import Drive, Ground, Layer, Output, Points, Project, Surface

CLAY = Layer("clay", 10.0, 19.0, 0.5, "cohesive")
DEMO = Path(__file__).resolve().parent.parent / "demo_site"


def ground(level=10.0, layers=(CLAY,)):
    return Ground(Surface(level_m=level), level - 2.0, tuple(layers))


def drive(xy, axis_levels, name="A", diameter=3.0, vl_pct=1.0, **kw):
    xy = np.asarray(xy, dtype=float)
    v = np.broadcast_to(np.asarray(axis_levels, dtype=float), (len(xy),)).copy()
    return Drive(name, xy, v, "axis", diameter, vl_pct, **kw)


def project(drives, spacing=1.0, points=None, ground_=None, precision_mm=0.001, threshold_mm=0.1):
    return Project(
        "test", "EPSG:25832", ground_ or ground(), tuple(drives),
        Output(spacing, (1.0, 2.0, 5.0), grid_threshold_mm=threshold_mm, precision_mm=precision_mm), points=points,
    )


def points(xy, depth=None, ids=None):
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    depth = np.zeros(len(xy)) if depth is None else np.broadcast_to(np.asarray(depth, float), (len(xy),)).copy()
    ids = ids or tuple(f"P{k}" for k in range(len(xy)))
    return Points(tuple(ids), xy[:, 0].copy(), xy[:, 1].copy(), depth)


def arc(radius, angle_deg, n, start=(0.0, 0.0), heading_deg=0.0):
    """Vertices of a left-hand circular arc in plan."""
    h0 = np.radians(heading_deg)
    a = np.linspace(0.0, np.radians(angle_deg), n)
    cx, cy = start[0] - radius * np.sin(h0), start[1] + radius * np.cos(h0)
    return np.column_stack([cx + radius * np.sin(h0 + a), cy - radius * np.cos(h0 + a)])


def demo_copy(folder) -> Path:
    """The demo site copied into `folder`/site (without earlier outputs), for a test to edit; its project file."""
    import shutil

    site = Path(folder) / "site"
    shutil.copytree(DEMO, site, ignore=shutil.ignore_patterns("out", "fit"))
    return site / "ostrey.toml"


def run_demo(out) -> None:
    """`settle run` on the demo site through the command line, quietly, into `out`; fails the test if it fails."""
    done = subprocess.run([sys.executable, "-m", "settle", "run", DEMO / "ostrey.toml", "--out", out, "--quiet"],
                          capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
