"""Shared fixtures: the path to Rscript for the checks against R's survey package.

When R or its `survey` package is missing, those checks are skipped with a reason that says
so plainly, and the end of the pytest run repeats it, so a green run without R cannot pass
for a verified one.
"""
from __future__ import annotations

import shutil
import subprocess

import pytest

R_MISSING = "R's survey package not found: the reference checks against R did NOT run"
BROWSER_MISSING = "Chromium not found: the report was NOT rendered in a browser"
REAL_FILES_MISSING = "REAL-FILE CHECK DID NOT RUN"  # tests/sources/test_nhanes_real_files.py
LOUD_SKIPS = (R_MISSING, BROWSER_MISSING, REAL_FILES_MISSING)


@pytest.fixture(scope="session")
def rscript() -> str:
    """Path of Rscript, once `library(survey)` is known to load; otherwise skip loudly."""
    path = shutil.which("Rscript")
    if path is None:
        pytest.skip(f"{R_MISSING} (no `Rscript` on PATH)")
    try:
        probe = subprocess.run(
            [path, "--vanilla", "-e", "suppressPackageStartupMessages(library(survey))"],
            capture_output=True, text=True, timeout=120,
        )
    except (OSError, subprocess.TimeoutExpired) as exc:
        pytest.skip(f"{R_MISSING} ({path} could not be run: {exc})")
    if probe.returncode != 0:
        detail = (probe.stderr.strip().splitlines() or ["no message"])[-1]
        pytest.skip(f"{R_MISSING} ({path}: {detail})")
    return path


@pytest.fixture(scope="session")
def chromium() -> str:
    """Path of a headless-capable Chromium (Debian's `chromium`); otherwise skip loudly."""
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path is not None:
            return path
    pytest.skip(f"{BROWSER_MISSING} (no `chromium` on PATH)")


def pytest_terminal_summary(terminalreporter, exitstatus, config):
    """Repeat each loud-skip sentence at the end of the run whenever a check was skipped."""
    for sentence in LOUD_SKIPS:
        skipped = [rep for rep in terminalreporter.stats.get("skipped", [])
                   if sentence in str(getattr(rep, "longrepr", ""))]
        if skipped:
            terminalreporter.write_sep("!", sentence, red=True, bold=True)
            remedy = ("set COHORTSTONE_NHANES_DIR to a folder of the publisher's files"
                      if sentence == REAL_FILES_MISSING else "`.ci/run` installs what they need")
            terminalreporter.write_line(f"{len(skipped)} test(s) were skipped for this; "
                                        f"{remedy}.", red=True, bold=True)
