"""Every Python block of the README runs as written, from a folder that holds the demo site as a checkout does."""
from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
BLOCKS = re.findall(r"```python\n(.*?)```", (ROOT / "README.md").read_text(encoding="utf-8"), re.S)


def test_the_readme_has_python_blocks():
    assert BLOCKS


@pytest.mark.parametrize("k", range(len(BLOCKS)))
def test_a_readme_python_block_runs_as_written(k, tmp_path):
    (tmp_path / "demo_site").symlink_to(ROOT / "demo_site", target_is_directory=True)
    done = subprocess.run([sys.executable, "-c", BLOCKS[k]], cwd=tmp_path, capture_output=True, text=True)
    assert done.returncode == 0, done.stderr[-3000:]
    for path in re.findall(r'write_geopackage\("([^"]+)"', BLOCKS[k]):
        assert (tmp_path / path).is_file(), path


def test_ci_runs_exactly_the_readmes_test_command():
    """.ci/run runs the README's test command, word for word (browser install included)."""
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    command = re.search(r"Set up and pass the tests.*?```\n(.*?)\n```", readme, re.S).group(1).strip()
    ci = [line for line in (ROOT / ".ci" / "run").read_text().splitlines()
          if line and not line.startswith(("#", "set ", "cd "))]
    assert ci == [command]
    assert command.startswith("bash tests/install_browser.sh && ")
