"""A run folder's files replaced as one set, with a manifest (run.json) of what made them.

Protocol (every step survives `kill -9`):

1. Lock. An exclusive lock on the folder (released by the system when the process dies) keeps two runs from writing
   one folder at once; a second run is refused with OutputBusyError.
2. Recover. What an earlier run left: a committed set not yet moved into place (`DIR/.settle-commit-*`) is moved in
   now (roll forward); staging folders of runs killed before they committed (`DIR/.settle-staging-*`) are removed.
3. Stage. Every file of the new set is written into `DIR/.settle-staging-<id>/` (each through its own temporary file
   and rename, flushed to disk).
4. Commit. run.json (the tool version, the command and options, the sha256 of every input read and of every output)
   is written into the staging folder last, and the staging folder is renamed `DIR/.settle-commit-<id>`: one atomic
   rename, made durable, is the moment the new set exists.
5. Swap. The committed files are renamed over the earlier ones, files of the earlier set that the new set no longer
   has are removed, run.json goes last, and the empty commit folder is removed. Killed in this step, the next command
   that opens the folder finishes it (step 2), so every reader sees the complete earlier set or the complete new one.

A GeoPackage that another program holds open for editing (its -wal, -shm or -journal file lies beside it) is not
replaced: the run stops before its commit with OutputBusyError and the earlier set stays.
"""
from __future__ import annotations

import contextlib
import json
import os
import shutil
import uuid
from pathlib import Path

from settle.inputs.file_hashes import sha256_of

from .geopackage import OutputBusyError, OutputError, _fsync_file, _fsync_folder, _refuse_if_busy

try:  # POSIX; elsewhere runs are not locked against each other
    import fcntl
except ImportError:  # pragma: no cover
    fcntl = None

MANIFEST = "run.json"
STAGING_PREFIX = ".settle-staging-"
COMMIT_PREFIX = ".settle-commit-"


def read_manifest(folder) -> dict | None:
    """The run.json of a run folder, or None when it has none (or it cannot be read as a JSON object)."""
    path = Path(folder) / MANIFEST
    try:
        manifest = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, ValueError):
        return None
    return manifest if isinstance(manifest, dict) else None


def _lock(folder: Path) -> int:
    """An exclusive, non-blocking lock on the folder itself (no file is left behind); the open descriptor keeps it."""
    fd = os.open(folder, os.O_RDONLY)
    if fcntl is not None:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(fd)
            raise OutputBusyError(f"{folder}: another settle command is writing this folder; wait for it to "
                                  "finish, or give another --out") from None
    return fd


def _swap_in(folder: Path, committed: Path) -> None:
    """Move a committed set into the folder (idempotent: a file already moved is skipped), run.json last."""
    new = read_manifest(committed)
    if new is None:  # the commit folder lost its manifest: nothing that can be trusted is in it
        shutil.rmtree(committed, ignore_errors=True)
        return
    old = read_manifest(folder) or {}
    for name in new.get("outputs", {}):
        if (committed / name).exists():
            os.replace(committed / name, folder / name)
    for name in set(old.get("outputs", {})) - set(new.get("outputs", {})):
        with contextlib.suppress(FileNotFoundError):
            os.remove(folder / name)
    os.replace(committed / MANIFEST, folder / MANIFEST)
    _fsync_folder(str(folder))
    shutil.rmtree(committed, ignore_errors=True)


def recover(folder) -> list[str]:
    """Finish what killed runs left in a folder: roll a committed set forward, remove dead staging folders.

    Call it only with the folder's lock held (as `RunSet` does). Returns what was done, one line per item.
    """
    folder = Path(folder)
    done = []
    for committed in sorted(folder.glob(COMMIT_PREFIX + "*"), key=lambda p: p.stat().st_mtime):
        _swap_in(folder, committed)
        done.append(f"finished moving the outputs of an interrupted run into {folder}")
    for staging in folder.glob(STAGING_PREFIX + "*"):
        shutil.rmtree(staging, ignore_errors=True)
        done.append(f"removed {staging.name}, left by a run killed before it finished")
    return done


class RunSet:
    """One set of outputs being written into a run folder.

        with RunSet(out) as run_set:
            write files into run_set.stage ...
            run_set.commit(manifest)

    Leaving the block without `commit` (an exception) removes the staging folder; the earlier set stays.
    """

    def __init__(self, folder):
        self.folder = Path(folder)
        self.stage: Path | None = None
        self.recovered: list[str] = []
        self._lock = None
        self._committed = False

    def __enter__(self) -> "RunSet":
        self.folder.mkdir(parents=True, exist_ok=True)
        self._lock = _lock(self.folder)
        try:
            self.recovered = recover(self.folder)
            self.stage = self.folder / f"{STAGING_PREFIX}{uuid.uuid4().hex}"
            self.stage.mkdir()
        except BaseException:
            self._release()
            raise
        return self

    def __exit__(self, kind, error, trace) -> None:
        try:
            if not self._committed and self.stage is not None:
                shutil.rmtree(self.stage, ignore_errors=True)
        finally:
            self._release()

    def _release(self) -> None:
        if self._lock is not None:
            os.close(self._lock)
            self._lock = None

    @property
    def committed(self) -> bool:
        """Whether the new set is committed (it then replaces the earlier one, now or at the next command)."""
        return self._committed

    def earlier(self) -> dict:
        """The manifest of the set in place before this one ({} when none)."""
        return read_manifest(self.folder) or {}

    def commit(self, manifest: dict, kept=()) -> dict:
        """Record the outputs' hashes in the manifest, write it, commit the set and swap it in. Returns the manifest.

        `manifest` holds everything but "outputs", which is made here: the files written into the staging folder, and
        the files `kept` from the earlier set as they are (with the hashes the earlier manifest recorded).
        """
        names = sorted(p.name for p in self.stage.iterdir() if p.is_file() and not p.name.startswith("."))
        for name in names:
            if name.lower().endswith(".gpkg"):
                _refuse_if_busy(str(self.folder / name))
        earlier = self.earlier().get("outputs", {})
        outputs = {name: earlier[name] for name in kept if name in earlier and name not in names}
        outputs.update({name: sha256_of(self.stage / name) for name in names})
        manifest = dict(manifest, outputs=dict(sorted(outputs.items())))
        text = json.dumps(manifest, indent=2, allow_nan=False) + "\n"
        (self.stage / MANIFEST).write_text(text, encoding="utf-8")
        for name in names + [MANIFEST]:
            _fsync_file(self.stage / name)
        _fsync_folder(str(self.stage))
        committed = self.folder / (COMMIT_PREFIX + self.stage.name[len(STAGING_PREFIX):])
        os.replace(self.stage, committed)
        _fsync_folder(str(self.folder))
        self._committed = True
        _swap_in(self.folder, committed)
        return manifest


def changed_files(manifest: dict, folder, section: str) -> list[str]:
    """Files of a manifest's `section` ("inputs" or "outputs") whose bytes differ now, or that are gone.

    Names in "outputs" lie in the run folder. Paths in "inputs" are relative to the run folder; where the folder was
    moved without its inputs, the absolute path the run recorded ("input_locations") is tried too. Inputs are named
    as the current folder sees them."""
    folder = Path(folder)
    locations = manifest.get("input_locations") or {}
    changed = []
    for name, digest in (manifest.get(section) or {}).items():
        places = [folder / name] + ([Path(locations[name])] if section == "inputs" and name in locations else [])
        if not any(_holds(path, digest) for path in places):
            shown = os.path.relpath(places[-1]) if section == "inputs" else name
            changed.append(Path(shown).as_posix())
    return changed


def _holds(path: Path, digest: str) -> bool:
    """Whether a file is there with these bytes (its sha256)."""
    try:
        return path.is_file() and sha256_of(path) == digest
    except OSError:
        return False


__all__ = ["MANIFEST", "OutputError", "RunSet", "changed_files", "read_manifest", "recover", "sha256_of"]
