"""The layout of the packages: data flows one way, and only gis_out writes files.

inputs -> engine -> assessments -> monitoring -> procedure (the run) -> gis_out (the run folder) -> command line.
A module may import its own layer and the layers before it, never a later one. The checks read the source (AST), so
imports inside functions count too.
"""
from __future__ import annotations

import ast
import importlib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

#: Layers in the order the data flows. `settle.errors` and `settle.version` come first: every layer may name them.
#: The package `settle` itself (the public API: `load_project`, `run`) stands with the command line, last.
LAYERS = (
    ("settle.errors", "settle.version"),
    ("settle.inputs",),
    ("settle.engine",),
    ("settle.assessments",),
    ("settle.monitoring",),
    ("settle.procedure",),
    ("gis_out",),
    ("settle", "settle.cli", "settle.terminal", "settle.__main__", "settle.assessment", "settle.service"),
)
#: Calls that write, delete or move files; inside settle/ none may be made (gis_out writes every file of a run).
WRITING_METHODS = {"write_text", "write_bytes", "to_file", "to_csv", "savefig", "mkdir", "write_dataframe", "unlink",
                   "rmdir", "touch"}
#: Functions of these modules that write, delete or move files.
WRITING_FUNCTIONS = {"os": {"replace", "remove", "rename", "unlink", "makedirs", "mkdir", "rmdir", "open"},
                     "shutil": {"copy", "copy2", "copyfile", "move", "rmtree"}, "json": {"dump"},
                     "pickle": {"dump"}}


def modules() -> dict[str, Path]:
    """Every module of settle and gis_out, by dotted name."""
    found = {}
    for package in ("settle", "gis_out"):
        for path in sorted((ROOT / package).rglob("*.py")):
            parts = path.relative_to(ROOT).with_suffix("").parts
            found[".".join(parts[:-1] if parts[-1] == "__init__" else parts)] = path
    return found


def layer_of(name: str) -> int:
    """Index in LAYERS of the longest prefix that names a module's layer."""
    best, rank = -1, None
    for k, prefixes in enumerate(LAYERS):
        for prefix in prefixes:
            inside = name == prefix or (name.startswith(prefix + ".") and prefix != "settle")  # the root: itself only
            if inside and len(prefix) > best:
                best, rank = len(prefix), k
    if rank is None:
        raise AssertionError(f"{name} belongs to no layer: add it to LAYERS in {Path(__file__).name}")
    return rank


def imported(name: str, path: Path) -> list[tuple[int, str]]:
    """(line, module) for every import of settle or gis_out in a module, relative imports resolved."""
    package = name if path.name == "__init__.py" else name.rsplit(".", 1)[0]
    out = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            out += [(node.lineno, a.name) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                anchor = package.split(".")[: len(package.split(".")) - node.level + 1]
                base = ".".join(anchor + ([base] if base else []))
            # `from .x import y` may name a module y: check the deeper name when it is one.
            for alias in node.names:
                deeper = f"{base}.{alias.name}"
                out.append((node.lineno, deeper if deeper in MODULES else base))
    return [(line, m) for line, m in out if m.split(".")[0] in ("settle", "gis_out")]


MODULES = modules()


@pytest.mark.parametrize("name", sorted(MODULES))
def test_imports_follow_the_flow_of_data(name):
    own = layer_of(name)
    wrong = [f"line {line}: {target}" for line, target in imported(name, MODULES[name]) if layer_of(target) > own]
    assert not wrong, f"{name} ({LAYERS[own][0]}) imports a later layer: {'; '.join(wrong)}"


def test_inputs_never_import_an_assessment():
    for name, path in MODULES.items():
        if name.startswith("settle.inputs"):
            assert not [t for _, t in imported(name, path) if t.startswith("settle.assessments")], name


def test_only_the_front_ends_of_settle_import_gis_out():
    """The command line and the site service (settle.service) write through gis_out; nothing else in settle may."""
    users = {name for name, path in MODULES.items()
             if name.startswith("settle") and any(t.startswith("gis_out") for _, t in imported(name, path))}
    assert "settle.cli" in users and all(u == "settle.cli" or u.startswith("settle.service.") for u in users)


def writing_calls(tree) -> list[str]:
    """`line N: call` for every call in a module's tree that writes, deletes or moves a file."""
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute):
            attr, owner = node.func.attr, node.func.value
            module = owner.id if isinstance(owner, ast.Name) else None
            if attr in WRITING_METHODS or attr in WRITING_FUNCTIONS.get(module, ()):
                found.append(f"line {node.lineno}: {attr}")
        elif isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id == "open":
            mode = node.args[1] if len(node.args) > 1 else next((k.value for k in node.keywords if k.arg == "mode"),
                                                                 None)
            if not (isinstance(mode, ast.Constant) and set(str(mode.value)) <= set("rbt")) and mode is not None:
                found.append(f"line {node.lineno}: open")
    return found


@pytest.mark.parametrize("name", sorted(n for n in MODULES if n.startswith("settle")))
def test_settle_writes_no_file(name):
    calls = writing_calls(ast.parse(MODULES[name].read_text(encoding="utf-8")))
    assert not calls, f"{name} writes files (gis_out does that): {calls}"


@pytest.mark.parametrize("package", ["settle.inputs", "settle.engine", "settle.assessments", "settle.monitoring",
                                     "settle.procedure"])
def test_every_package_says_what_it_holds_and_may_import(package):
    doc = importlib.import_module(package).__doc__ or ""
    assert "May import" in doc and len(doc.split()) > 20, package


def test_the_checks_see_what_they_look_for():
    # The checkers themselves: an input that imported an assessment, and a module that wrote files, would be caught.
    assert layer_of("settle.assessments.buildings") > layer_of("settle.inputs.project_file")
    assert layer_of("gis_out.frames") > layer_of("settle.procedure.results")
    assert layer_of("settle.cli") > layer_of("gis_out.run_folder")
    for stray in ("numpy.linalg", "settle.somewhere_new"):
        with pytest.raises(AssertionError, match="belongs to no layer"):
            layer_of(stray)
    source = ("import os, json\nos.replace(a, b)\njson.dump(x, f)\nopen(p, 'w')\nopen(p)\nPath(p).write_text(t)\n"
              "s.replace(a, b)\n")
    assert writing_calls(ast.parse(source)) == ["line 2: replace", "line 3: dump", "line 4: open",
                                                "line 6: write_text"]
