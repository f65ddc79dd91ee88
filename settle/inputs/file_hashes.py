"""The files a run read, fingerprinted: sha256 of their bytes, so a run folder can tell when its inputs changed."""
from __future__ import annotations

import hashlib
from pathlib import Path

HASH_CHUNK_BYTES = 1 << 20


def sha256_of(path) -> str:
    """The sha256 of a file's bytes, as hex."""
    digest = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(HASH_CHUNK_BYTES), b""):
            digest.update(chunk)
    return digest.hexdigest()


def file_hashes(paths) -> dict[Path, str]:
    """Resolved path -> sha256 of each file, in the order given, each once."""
    hashes: dict[Path, str] = {}
    for path in paths:
        path = Path(path).resolve()
        if path not in hashes:
            hashes[path] = sha256_of(path)
    return hashes
