"""settle: greenfield ground movements and damage assessment for pipejacked and microtunnelled drives.

    import settle, gis_out
    project = settle.load_project("demo_site/ostrey.toml")
    result = settle.run(project)            # arrays: result.grid.settlement_mm, result.points, result.drives ...
    layers = gis_out.frames(result)         # GeoDataFrames, one per GeoPackage layer

Results are planning estimates: they support, and do not replace, the judgement of a qualified engineer and local
codes.
"""
from .errors import InputError
from .version import __version__


def load_project(path):
    """Read and validate a project file (TOML); see `settle.project.load_project`."""
    from .inputs.project_file import load_project as _load

    return _load(path)


def run(project, progress=None):
    """Assess a project (a `Project` or the path of its file) and return the `Result`; see `settle.assessment.run`."""
    from .procedure.orchestrator import run as _run

    return _run(project, progress)


__all__ = ["InputError", "__version__", "load_project", "run"]
