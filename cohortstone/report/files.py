"""Atomic output: everything is written into a hidden staging folder, then moved into place.

A failed run removes the staging folder (and the output folder if this run created it), so
no half report is ever left behind.
"""
from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from pathlib import Path
from typing import Iterator


@contextlib.contextmanager
def staged_folder(target: Path) -> Iterator[Path]:
    """Yield a staging folder; on success it replaces `target` in one rename."""
    parent = target.parent
    created = []
    for folder in reversed([parent, *parent.parents]):
        if not folder.exists():
            created.append(folder)
    parent.mkdir(parents=True, exist_ok=True)
    staging = Path(tempfile.mkdtemp(prefix=f".{target.name}.partial-", dir=parent))
    try:
        yield staging
        old = None
        if target.exists():
            old = Path(tempfile.mkdtemp(prefix=f".{target.name}.old-", dir=parent))
            os.replace(target, old / target.name)
        os.replace(staging, target)
        if old is not None:
            shutil.rmtree(old)
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        for folder in reversed(created):
            with contextlib.suppress(OSError):
                folder.rmdir()
        raise


def write_text(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_text(text, encoding="utf-8", newline="\n")
    return path
