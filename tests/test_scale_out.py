"""Runs that scale out on Dask: the work cut into tasks by drive and tiles along the route, the results put back in
the project's order, and the same numbers in one process, with --workers 2, and on a cluster started by hand (a real
scheduler and two workers on localhost)."""
import json
import os
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from settle.assessments.buildings import assess_buildings
from settle.cli import main
from settle.errors import InputError
from settle.inputs.project_file import load_project
from settle.procedure.chunks import asset_groups, gather_building_results, gather_rows
from settle.procedure.envelope import subset_table
from settle.procedure.orchestrator import Assessment
from settle.procedure.workers import MMAP_THRESHOLD_BYTES, Workers

from . import builders
from .test_probability_run import site_with

SAMPLES = "[uncertainty]\nsamples = 64\nseed = 11\n"


def same(a, b, path="result"):
    """Assert two results equal field by field, arrays exactly (NaN where NaN)."""
    import dataclasses

    if dataclasses.is_dataclass(a):
        for f in dataclasses.fields(a):
            same(getattr(a, f.name), getattr(b, f.name), f"{path}.{f.name}")
    elif isinstance(a, dict):
        assert a.keys() == b.keys(), path
        for k in a:
            same(a[k], b[k], f"{path}[{k}]")
    elif isinstance(a, np.ndarray):
        assert a.shape == b.shape and a.dtype == b.dtype, path
        if a.dtype.kind == "f":
            np.testing.assert_array_equal(a, b, err_msg=path)
        else:
            assert np.array_equal(a, b), path
    else:
        assert a == b, path


@pytest.fixture(scope="module")
def demo():
    project = load_project(builders.DEMO / "ostrey.toml")
    return project, Assessment(project).route()


def test_every_building_is_in_exactly_one_task_and_the_tasks_follow_drives_and_tiles(demo):
    project, assessment = demo
    groups = asset_groups(project.buildings.polygons, assessment.drives, tile_length_m=60.0, max_assets=3)
    rows = np.concatenate(groups)
    assert sorted(rows.tolist()) == list(range(len(project.buildings)))
    assert all(len(g) <= 3 and np.all(np.diff(g) > 0) for g in groups)
    assert len(groups) > 5  # the demo's 29 buildings spread over several tiles of 60 m


def test_buildings_assessed_in_tasks_and_gathered_equal_the_whole_table_assessed_at_once(demo):
    """Walls and parts refer to one another by index: gathering renumbers them; every field must come out exactly as
    the assessment of the whole table gives it."""
    project, assessment = demo
    whole = assess_buildings(project.buildings, assessment.movements_at, project.building_options)
    groups = asset_groups(project.buildings.polygons, assessment.drives, tile_length_m=60.0, max_assets=4)
    parts = [assess_buildings(subset_table(project.buildings, g), assessment.movements_at, project.building_options)
             for g in groups]
    same(whole, gather_building_results(parts, groups, len(project.buildings)))


@settings(max_examples=60, deadline=None)
@given(st.integers(1, 40), st.integers(0, 2**32 - 1), st.integers(1, 6))
def test_gather_rows_puts_every_row_back_where_it_came_from(n, seed, pieces):
    """Identity: cut a table into random tasks, gather them, and the table comes back."""
    from dataclasses import dataclass

    @dataclass
    class Rows:
        value: np.ndarray
        pair: np.ndarray
        label: tuple
        named: dict
        count: int

    rng = np.random.default_rng(seed)
    full = Rows(rng.normal(size=n), rng.normal(size=(n, 2)), tuple(f"r{k}" for k in range(n)),
                {"a": rng.integers(0, 9, n)}, 7)
    order = rng.permutation(n)
    cuts = np.sort(rng.choice(np.arange(1, n), size=min(pieces - 1, n - 1), replace=False)) if n > 1 else []
    groups = [np.sort(g) for g in np.split(order, cuts)]
    parts = [Rows(full.value[g], full.pair[g], tuple(full.label[i] for i in g), {"a": full.named["a"][g]}, 7)
             for g in groups]
    same(full, gather_rows(parts, groups, n))


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="module")
def cluster():
    """A Dask scheduler and two workers on localhost, started with the `dask` command as a user would."""
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    env = dict(os.environ, MALLOC_MMAP_THRESHOLD_=str(MMAP_THRESHOLD_BYTES))
    dask = [sys.executable, "-m", "dask"]
    procs = [subprocess.Popen(dask + ["scheduler", "--host", "127.0.0.1", "--port", str(port), "--no-dashboard"],
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)]
    try:
        for _ in range(2):
            procs.append(subprocess.Popen(dask + ["worker", address, "--nthreads", "1", "--no-dashboard"],
                                          stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env))
        from dask.distributed import Client

        with Client(address, timeout=30) as client:
            client.wait_for_workers(2, timeout=60)
        yield address
    finally:
        for p in procs[::-1]:
            p.terminate()
        for p in procs:
            try:
                p.wait(timeout=5)
            except subprocess.TimeoutExpired:
                p.kill()


def _run(project, out, *extra):
    done = subprocess.run([sys.executable, "-m", "settle", "run", project, "--out", out, "--quiet", *extra],
                          capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr
    return out


@pytest.fixture(scope="module")
def probabilistic_site(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("scale-out")
    return tmp, site_with(tmp, uncertainty=SAMPLES)


def _outputs(folder: Path) -> dict:
    """Every output's bytes but run.json (which records the command, and so the mode)."""
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir()) if p.is_file() and p.name != "run.json"}


def test_the_same_seed_gives_the_same_numbers_in_one_process_with_workers_and_on_a_cluster(probabilistic_site,
                                                                                          cluster):
    """Byte for byte: the GeoPackage (probabilities, percentiles, envelope), the tables and summary.json."""
    tmp, project = probabilistic_site
    one = _outputs(_run(project, tmp / "one"))
    local = _outputs(_run(project, tmp / "local", "--workers", "2"))
    remote = _outputs(_run(project, tmp / "remote", "--scheduler", cluster))
    summary = json.loads(one["summary.json"])
    assert summary["probabilistic"]["samples"] == 64 and summary["probabilistic"]["seed"] == 11
    assert one.keys() == local.keys() == remote.keys()
    for name in one:
        assert one[name] == local[name], f"{name} differs with --workers 2"
        assert one[name] == remote[name], f"{name} differs on the cluster"
    record = json.loads((tmp / "remote" / "run.json").read_text())
    assert record["options"]["scheduler"] == cluster


@pytest.mark.parametrize("args, words", [
    (["--workers", "0"], "from 1 to 256"),
    (["--workers", "two"], "whole number"),
    (["--workers", "1e308"], "whole number"),
    (["--workers", "2", "--scheduler", "tcp://127.0.0.1:1"], "not allowed with"),
    (["--scheduler", "nonsense"], "must be a Dask scheduler's address"),
    (["--scheduler", ""], "must be a Dask scheduler's address"),
])
def test_bad_worker_options_end_in_one_line_and_exit_2(tmp_path, capsys, args, words):
    with pytest.raises(SystemExit) as stop:
        main(["run", str(builders.DEMO / "ostrey.toml"), "--out", str(tmp_path / "out"), *args])
    assert stop.value.code == 2
    err = capsys.readouterr().err
    assert words in err and "Traceback" not in err
    assert not (tmp_path / "out").exists()


def test_a_scheduler_that_does_not_answer_is_one_line_and_exit_2(tmp_path, capsys, monkeypatch):
    import settle.procedure.workers as workers

    monkeypatch.setattr(workers, "CONNECT_TIMEOUT_S", 2.0)
    started = time.perf_counter()
    code = main(["run", str(builders.DEMO / "ostrey.toml"), "--out", str(tmp_path / "out"), "--scheduler",
                 f"tcp://127.0.0.1:{_free_port()}"])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "no Dask scheduler answered" in err, err
    assert time.perf_counter() - started < 30
    assert not (tmp_path / "out" / "ostrey.gpkg").exists()


def test_workers_refuse_a_count_and_a_scheduler_together():
    with pytest.raises(InputError, match="not both"):
        Workers(count=2, scheduler="tcp://127.0.0.1:8786")
