"""A parquet cache of the harmonized table, so reruns skip parsing the transport files.

The key is the SHA-256 of everything the table depends on: each input file's SHA-256, the
cycles and components read, the food-code map, the code of this sub-package and the pandas
version (whose reader parses the files). Change any of them and the key changes, so a stale
table is never read. The loader's record travels with the table in the parquet metadata.
Writes go to a temporary name first and are renamed into place; a folder that cannot be
written only means no cache.
"""
from __future__ import annotations

import hashlib
import json
import os
import tempfile
from pathlib import Path

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq

METADATA_KEY = b"cohortstone.record"
CODE = sorted(Path(__file__).parent.glob("*.py"))


def _plain(value):
    """numpy scalars -> Python numbers for JSON; anything else as text."""
    return value.item() if hasattr(value, "item") else str(value)


def key(files: dict[str, str], cycles: tuple[str, ...], components: list[str],
        foods_sha256: str | None) -> str:
    """SHA-256 (hex) naming the cache entry of this exact input."""
    code = hashlib.sha256()
    for path in CODE:
        code.update(path.name.encode() + b"\0" + path.read_bytes())
    payload = {"files": dict(sorted(files.items())), "cycles": list(cycles),
               "components": list(components), "foods": foods_sha256,
               "code": code.hexdigest(), "pandas": pd.__version__}
    return hashlib.sha256(json.dumps(payload, sort_keys=True).encode()).hexdigest()


def entry(folder: Path, cache_key: str) -> Path:
    return folder / f"{cache_key}.parquet"


def read(folder: Path, cache_key: str) -> tuple[pd.DataFrame, dict] | None:
    """The cached table and record, or None (absent or unreadable: rebuilt and rewritten)."""
    path = entry(folder, cache_key)
    if not path.is_file():
        return None
    try:
        table = pq.read_table(path)
        record = json.loads(table.schema.metadata[METADATA_KEY])
        return table.to_pandas(), record
    except Exception:  # a damaged cache file is only a cache miss
        return None


def write(folder: Path, cache_key: str, frame: pd.DataFrame, record: dict) -> str:
    """Store the table atomically; return what happened, for the record."""
    try:
        folder.mkdir(parents=True, exist_ok=True)
        table = pa.Table.from_pandas(frame, preserve_index=False)
        metadata = {**(table.schema.metadata or {}),
                    METADATA_KEY: json.dumps(record, default=_plain).encode()}
        handle, temporary = tempfile.mkstemp(prefix=".partial-", suffix=".parquet", dir=folder)
        os.close(handle)
        try:
            pq.write_table(table.replace_schema_metadata(metadata), temporary)
            os.replace(temporary, entry(folder, cache_key))
        finally:
            if os.path.exists(temporary):
                os.remove(temporary)
    except OSError as exc:
        return f"not written ({exc.strerror or exc})"
    return "written"
