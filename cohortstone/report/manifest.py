"""The run manifest: parsed config, input checksums, versions, timings, domain counts."""
from __future__ import annotations

import dataclasses
import json
import platform
from importlib import metadata
from pathlib import Path
from typing import Any

import numpy as np

PACKAGES = ("cohortstone", "numpy", "pandas", "scipy", "statsmodels", "lifelines", "pyarrow",
            "matplotlib", "PyYAML")


def versions() -> dict[str, str]:
    out = {"python": platform.python_version()}
    for name in PACKAGES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


def _plain(value: Any) -> Any:
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {k: _plain(v) for k, v in dataclasses.asdict(value).items()}
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, Path):
        return str(value)
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


def to_json(manifest: dict) -> str:
    return json.dumps(_plain(manifest), indent=2, sort_keys=False, default=str) + "\n"
