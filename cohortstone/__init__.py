"""cohortstone: design-correct epidemiology of kidney stones, fluids and beverages.

Public API: `run(config)` and `check(config)` take a YAML path or a dict, as the CLI does.
"""
from __future__ import annotations

__version__ = "0.1.0"

from cohortstone.config import load_yaml as load_config  # noqa: E402
from cohortstone.pipeline import Results, check, run  # noqa: E402

__all__ = ["run", "check", "load_config", "Results", "__version__"]
