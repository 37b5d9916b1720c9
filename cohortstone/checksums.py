"""SHA-256 of files: inputs in the manifest, the cache key, the downloaded-file list."""
from __future__ import annotations

import hashlib
from pathlib import Path


def sha256(path: Path) -> str:
    """Hex digest of a file, read in 1 MiB blocks."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()
