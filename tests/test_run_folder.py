"""One run, one consistent folder: outputs replaced as a set, recorded in run.json, reproducible, and safe under kills,
full disks and a second run at the same time."""
from __future__ import annotations

import json
import os
import random
import resource
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from gis_out import run_set
from gis_out.run_set import MANIFEST, RunSet, read_manifest
from settle.cli import main
from settle.inputs.file_hashes import sha256_of

from .builders import DEMO


def settle_cli(*args, **kw) -> subprocess.CompletedProcess:
    """The command line in a subprocess, as a user runs it."""
    return subprocess.run([sys.executable, "-m", "settle", *map(str, args)], capture_output=True, text=True, **kw)


def copy_demo(tmp_path: Path) -> Path:
    """The demo site copied into tmp_path (its project file may then be edited); the project file's path."""
    site = tmp_path / "site"
    shutil.copytree(DEMO, site, ignore=shutil.ignore_patterns("out", "fit", "__pycache__"))
    return site / "ostrey.toml"


def edit_volume_loss(project: Path, new: str) -> None:
    text = project.read_text()
    assert "volume_loss_pct = 1.8" in text
    project.write_text(text.replace("volume_loss_pct = 1.8", f"volume_loss_pct = {new}", 1))


def consistent_set(out: Path) -> dict:
    """The folder's manifest, after asserting every output it names has the bytes it records and nothing of ours is
    left half done. (A command opening the folder first finishes a committed swap, as `RunSet` does.)"""
    with RunSet(out):
        pass
    manifest = read_manifest(out)
    assert manifest is not None, sorted(os.listdir(out))
    for name, digest in manifest["outputs"].items():
        assert sha256_of(out / name) == digest, name
    left = [n for n in os.listdir(out) if n.startswith((run_set.STAGING_PREFIX, run_set.COMMIT_PREFIX))]
    assert not left
    return manifest


@pytest.fixture(scope="module")
def site_run(tmp_path_factory):
    """The demo copied and run once with volume loss 1.8 % on its first drive: (project file, out, manifest)."""
    tmp = tmp_path_factory.mktemp("run_folder")
    project = copy_demo(tmp)
    out = tmp / "out"
    done = settle_cli("run", project, "--out", out, "--quiet", "--report", "--date", "2026-11-30")
    assert done.returncode == 0, done.stderr
    return project, out, read_manifest(out)


def test_run_json_records_version_command_inputs_and_outputs(site_run):
    project, out, manifest = site_run
    assert manifest["settle_version"] and manifest["kind"] == "run"
    assert manifest["command"][:2] == ["settle", "run"] and "--out" in manifest["command"]
    inputs = {(out / name).resolve(): digest for name, digest in manifest["inputs"].items()}
    assert inputs[project.resolve()] == sha256_of(project)
    for path, digest in inputs.items():  # every input read, hashed as it is now
        assert sha256_of(path) == digest
    names = {p.name for p in out.iterdir() if p.is_file() and not p.name.startswith(".")} - {MANIFEST}
    assert set(manifest["outputs"]) == names
    consistent_set(out)


def test_the_same_inputs_give_the_same_bytes(site_run, tmp_path):
    project, out, manifest = site_run
    again = tmp_path / "again"
    # The same command into another folder: every output but run.json (which names its folder) is byte-identical:
    # GeoPackage, CSV, JSON, PNG and PDF.
    done = settle_cli("run", project, "--out", again, "--quiet", "--report", "--date", "2026-11-30")
    assert done.returncode == 0, done.stderr
    second = read_manifest(again)
    assert second["outputs"] == manifest["outputs"]
    assert {"ostrey.gpkg", "ostrey-report.pdf", "summary.json", "buildings.csv"} <= set(second["outputs"])
    assert second["inputs"].values() and sorted(second["inputs"].values()) == sorted(manifest["inputs"].values())


def test_a_late_failure_keeps_the_earlier_set_and_leaves_nothing(site_run, tmp_path, monkeypatch, capsys):
    project, out, _ = site_run
    folder = tmp_path / "out"
    shutil.copytree(out, folder)
    before = consistent_set(folder)

    import gis_out.run_folder as rf

    def fail(*a, **k):
        raise RuntimeError("simulated failure after most files were written")

    monkeypatch.setattr(rf, "summarise", fail)
    assert main(["run", str(project), "--out", str(folder), "--quiet"]) == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "simulated failure" in err[0] and "earlier outputs are untouched" in err[0]
    assert consistent_set(folder) == before


def test_a_kill_in_the_middle_of_the_swap_is_finished_by_the_next_command(site_run, tmp_path, monkeypatch):
    project, out, _ = site_run
    folder = tmp_path / "out"
    shutil.copytree(out, folder)
    old = consistent_set(folder)
    edit = tmp_path / "changed.toml"
    shutil.copy(project, edit)
    real_replace, moved = os.replace, []

    class Killed(BaseException):
        pass

    def replace_then_die(src, dst):  # the process dies after moving three files of the new set
        if Path(src).parent.name.startswith(run_set.COMMIT_PREFIX):
            if len(moved) == 3:
                raise Killed
            moved.append(dst)
        real_replace(src, dst)

    edit_volume_loss(project, "2.4")
    try:
        monkeypatch.setattr(run_set.os, "replace", replace_then_die)
        with pytest.raises(Killed):
            main(["run", str(project), "--out", str(folder), "--quiet"])
    finally:
        shutil.copy(edit, project)
        monkeypatch.setattr(run_set.os, "replace", real_replace)
    assert any(n.startswith(run_set.COMMIT_PREFIX) for n in os.listdir(folder))  # committed, half moved
    new = consistent_set(folder)  # the next command finishes the swap
    assert new["outputs"] != old["outputs"] and new["outputs"]["summary.json"] != old["outputs"]["summary.json"]
    summary = json.loads((folder / "summary.json").read_text())
    assert summary["volume_check"]["lost_volume_m3"] > json.loads((out / "summary.json").read_text())[
        "volume_check"]["lost_volume_m3"]


def test_staging_folders_of_killed_runs_are_removed(tmp_path):
    folder = tmp_path / "out"
    (folder / (run_set.STAGING_PREFIX + "dead")).mkdir(parents=True)
    (folder / (run_set.STAGING_PREFIX + "dead") / "half.gpkg").write_bytes(b"x" * 100)
    with RunSet(folder) as rs:
        assert rs.recovered and not (folder / (run_set.STAGING_PREFIX + "dead")).exists()


def test_a_second_run_into_the_same_folder_is_refused(site_run, tmp_path, capsys):
    project, out, _ = site_run
    folder = tmp_path / "out"
    shutil.copytree(out, folder)
    with RunSet(folder):
        assert main(["run", str(project), "--out", str(folder), "--quiet"]) == 1
    err = capsys.readouterr().err
    assert "another settle command is writing this folder" in err and len(err.strip().splitlines()) == 1
    consistent_set(folder)


def test_kill_9_at_random_moments_leaves_one_consistent_set(site_run, tmp_path):
    project, out, first = site_run
    folder = tmp_path / "out"
    shutil.copytree(out, folder)
    changed = tmp_path / "site"
    shutil.copytree(project.parent, changed)
    edit_volume_loss(changed / "ostrey.toml", "3.0")
    start = time.perf_counter()
    assert settle_cli("run", changed / "ostrey.toml", "--out", tmp_path / "timing", "--quiet").returncode == 0
    duration = time.perf_counter() - start
    rng = random.Random(12)
    sets = {json.dumps(first["outputs"], sort_keys=True)}
    for delay in sorted(rng.uniform(0.2, duration) for _ in range(4)):
        child = subprocess.Popen([sys.executable, "-m", "settle", "run", str(changed / "ostrey.toml"), "--out",
                                  str(folder), "--quiet"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        time.sleep(delay)
        child.send_signal(signal.SIGKILL)
        child.wait()
        manifest = consistent_set(folder)
        project_hashes = set(manifest["inputs"].values())
        assert project_hashes & {sha256_of(project), sha256_of(changed / "ostrey.toml")}
        sets.add(json.dumps(manifest["outputs"], sort_keys=True))
    assert len(sets) <= 2  # the earlier set, or the new one: never a third, mixed one


def _small_file_limit(limit_bytes: int):
    def limit():
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # a write past the limit then fails with EFBIG
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit_bytes, limit_bytes))
    return limit


def test_a_full_disk_ends_with_exit_1_one_line_and_the_earlier_set(site_run, tmp_path):
    project, out, _ = site_run
    folder = tmp_path / "out"
    shutil.copytree(out, folder)
    before = consistent_set(folder)
    done = settle_cli("run", project, "--out", folder, "--quiet", preexec_fn=_small_file_limit(200_000))
    assert done.returncode == 1, done.stderr
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("settle: could not write the outputs:"), done.stderr
    assert "Traceback" not in done.stderr
    assert consistent_set(folder) == before


def test_a_report_after_the_inputs_changed_is_refused(site_run, tmp_path):
    project, out, _ = site_run
    folder = tmp_path / "out"
    shutil.copytree(out, folder)
    before = consistent_set(folder)
    text = project.read_text()
    try:
        edit_volume_loss(project, "3.0")
        done = settle_cli("report", project, "--out", folder)
    finally:
        project.write_text(text)
    assert done.returncode == 2
    line, = done.stderr.strip().splitlines()
    assert "the inputs changed since the run" in line and "ostrey.toml" in line
    assert "re-run: settle run " in line and "--report" in line
    assert consistent_set(folder) == before  # nothing written
    assert settle_cli("report", project, "--out", folder).returncode == 0  # inputs as they were: the report is made


def test_a_report_after_an_output_changed_is_refused(site_run, tmp_path):
    project, out, _ = site_run
    folder = tmp_path / "out"
    shutil.copytree(out, folder)
    with open(folder / "buildings.csv", "a") as f:
        f.write("edited by hand\n")
    done = settle_cli("report", project, "--out", folder)
    assert done.returncode == 2 and "the outputs changed since the run: buildings.csv" in done.stderr


def test_a_fifo_as_an_input_is_refused_at_once(tmp_path):
    project = copy_demo(tmp_path)
    fifo = project.parent / "pipe.csv"
    os.mkfifo(fifo)
    project.write_text(project.read_text().replace('file = "report_points.csv"', 'file = "pipe.csv"'))
    done = settle_cli("run", project, "--out", tmp_path / "out", "--quiet", timeout=60)
    assert done.returncode == 2 and "named pipe" in done.stderr and len(done.stderr.strip().splitlines()) == 1


def test_project_file_names_with_a_semicolon_run_and_with_a_newline_are_refused(tmp_path):
    project = copy_demo(tmp_path)
    semicolon = project.with_name("os;trey.toml")
    shutil.copy(project, semicolon)
    done = settle_cli("run", semicolon, "--out", tmp_path / "out", "--quiet")
    assert done.returncode == 0, done.stderr  # GDAL never sees the name: temporary files get plain ones
    assert (tmp_path / "out" / "os;trey.gpkg").is_file()
    newline = project.with_name("os\ntrey.toml")
    shutil.copy(project, newline)
    done = settle_cli("run", newline, "--out", tmp_path / "out2", "--quiet")
    assert done.returncode == 2 and "U+000A" in done.stderr and len(done.stderr.strip().splitlines()) == 1


@pytest.mark.parametrize("option, value, pattern", [
    ("--outlier-limit", "nan", "--outlier-limit must be more than 0; got nan"),
    ("--outlier-limit", "inf", "--outlier-limit must be a finite number"),
    ("--min-face-past-m", "nan", "--min-face-past-m must be a finite number of metres; got nan"),
])
def test_non_finite_fit_options_are_input_errors(tmp_path, capsys, option, value, pattern):
    code = main(["fit", str(DEMO / "ostrey.toml"), str(DEMO / "cable_tunnel_readings.csv"), "--out",
                 str(tmp_path / "fit"), "--quiet", option, value])
    err = capsys.readouterr().err
    assert code == 2 and pattern in err and len(err.strip().splitlines()) == 1
