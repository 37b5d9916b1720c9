"""Find the survey's transport (.XPT) files in a folder and read them, never modifying them.

Files are named as the publisher names them (`DEMO_J.xpt`, `P_KIQ_U.XPT`, …) in any letter
case. Reading uses pandas' SAS transport reader; numbers come back as floats.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from cohortstone.errors import DataError
from cohortstone.sources.nhanes.cycles import COMPONENTS, CYCLES

# Transport files store numbers as IBM hexadecimal floats. A zero comes back from pandas'
# reader as 16**-65 ≈ 5.4e-79 (checked in tests/sources/test_nhanes_recode.py); nothing
# the survey measures is that small, so anything below this is read as an exact zero.
TINY = 1e-70


@dataclass(frozen=True)
class Located:
    """The files of the requested cycles and components found in the folder, and those not."""

    found: dict          # (cycle, component) -> Path
    missing: list        # (cycle, component, expected file name)


def _index(folder: Path) -> dict[str, list[Path]]:
    """Upper-case file stem -> the .xpt files (any letter case) with that stem."""
    out: dict[str, list[Path]] = {}
    for path in sorted(folder.iterdir()):
        if path.is_file() and path.suffix.lower() == ".xpt":
            out.setdefault(path.stem.upper(), []).append(path)
    return out


def locate(folder: Path, cycles: tuple[str, ...], components: list[str]) -> Located:
    """Find `<stem>.xpt` for every cycle × component; a `DataError` if the folder is missing."""
    if not folder.is_dir():
        raise DataError(f"data.dir: the folder {str(folder)!r} does not exist. Give the folder "
                        "holding the survey's .XPT files (relative to the config file); "
                        "`cohortstone fetch` downloads them.")
    index = _index(folder)
    found, missing = {}, []
    for name in cycles:
        cycle = CYCLES[name]
        for component in components:
            stem = cycle.file_stem(COMPONENTS[component])
            paths = index.get(stem.upper(), [])
            if len(paths) > 1:
                raise DataError(f"data.dir: the folder {str(folder)!r} holds "
                                f"{' and '.join(p.name for p in paths)}, which differ only in "
                                "letter case; keep one.")
            if paths:
                found[(name, component)] = paths[0]
            else:
                missing.append((name, component, f"{stem}.xpt"))
    return Located(found, missing)


def missing_message(folder: Path, located: Located, reasons: dict[str, str]) -> str:
    """One paragraph naming every missing file, what it is needed for, and what was found."""
    items = [f"{cycle}: {file} ({COMPONENTS[comp].what}; needed for {reasons[comp]})"
             for cycle, comp, file in located.missing]
    have = sorted({p.name for p in located.found.values()})
    return (f"data.dir: {len(items)} file(s) the config needs are missing from "
            f"{str(folder)!r}: {'; '.join(items)}. Found: {', '.join(have) or 'none'}. "
            "Download them with `cohortstone fetch` (file names in any letter case).")


def read_xpt(path: Path) -> pd.DataFrame:
    """Read one transport file; tiny IBM-float artefacts become exact zeros."""
    try:
        frame = pd.read_sas(path, format="xport", encoding="latin-1")
    except Exception as exc:  # any reader failure is a problem with the user's file
        raise DataError(f"data.dir: cannot read {str(path)!r} as a SAS transport (.XPT) file: "
                        f"{exc}") from None
    frame.columns = [str(c).upper() for c in frame.columns]
    for column in frame.columns:
        values = frame[column]
        if pd.api.types.is_float_dtype(values):
            tiny = values.abs().lt(TINY) & values.ne(0)
            if tiny.any():
                frame[column] = values.mask(tiny, 0.0)
    return frame


def require(frame: pd.DataFrame, path: Path, variables: tuple[str, ...],
            unique: bool = True) -> None:
    """Every variable present; `SEQN` complete (and unique, for one-row-per-person files)."""
    absent = [v for v in ("SEQN", *variables) if v not in frame.columns]
    if absent:
        raise DataError(f"data.dir: {path.name} lacks the variable(s) {', '.join(absent)} "
                        f"expected in that file (found: {', '.join(frame.columns[:25])}"
                        f"{', …' if frame.shape[1] > 25 else ''}). Is it the right file?")
    seqn = frame["SEQN"]
    if seqn.isna().any():
        raise DataError(f"data.dir: {path.name} has {int(seqn.isna().sum())} row(s) without a "
                        "SEQN (respondent number).")
    if unique and seqn.duplicated().any():
        raise DataError(f"data.dir: {path.name} repeats SEQN {int(seqn[seqn.duplicated()].iloc[0])}"
                        "; this file should hold one row per person.")


def answer_counts(values: pd.Series) -> dict[str, int]:
    """Counts of each answer code as text ('1', '2', '9', …, 'missing'), for the record."""
    codes = values.map(lambda v: "missing" if pd.isna(v) else f"{v:g}")
    counts = codes.value_counts()
    order = sorted((k for k in counts.index if k != "missing"), key=float)
    out = {k: int(counts[k]) for k in order}
    out["missing"] = int(counts.get("missing", 0))
    return out
