"""The US National Health and Nutrition Examination Survey's public files as a source.

`load(spec, columns)` reads the transport files of the config's cycles (only the components
its columns need), merges them on `SEQN`, harmonizes them to the contract's schema, chooses and
combines the weights, and returns the table with a record of everything it did (for the
manifest, the methods text and `cohortstone check`). The facts and their sources are in the
docstrings of `cycles`, `recode`, `fluids`, `foods` and `weights`.
"""
from __future__ import annotations

from pathlib import Path

from cohortstone.sources.nhanes.merge import load

__all__ = ["load", "summary_lines", "input_hashes"]


def input_hashes(record: dict) -> dict[str, str]:
    """Path -> SHA-256 of every file the load read (already computed for the cache key)."""
    out = {item["file"]: item["sha256"] for item in record.get("files", [])}
    if "map_sha256" in record.get("beverages", {}):
        out[record["beverages"]["map"]] = record["beverages"]["map_sha256"]
    return out


def _answers(counts: dict) -> str:
    return ", ".join(f"{code} {n}" for code, n in counts.items())


def summary_lines(record: dict) -> list[str]:
    """What `cohortstone check` prints: per cycle the files, rows, stone answers; the weight."""
    lines = [f"survey files in {record['dir']} (cache: {record['cache']['status']})"]
    for cycle in record["cycles"]:
        files = [f"{Path(f['file']).name} {f['rows']} rows" for f in record["files"]
                 if f["cycle"] == cycle]
        lines.append(f"  {cycle}: " + "; ".join(files))
        for item, counts in record["answers"].get(cycle, {}).items():
            lines.append(f"    {item} answers: {_answers(counts)}")
    w = record["weights"]
    factors = ", ".join(f"{c} × {f:.4g}" for c, f in w["factors"].items())
    variables = ", ".join(sorted(set(w["variables"].values())))
    lines.append(f"weight: {variables} ({w['level']} subsample); {factors}")
    people = ", ".join(f"{c} {n} of {record['rows'][c]['demographics']}"
                       for c, n in record["people_with_weight"].items())
    lines.append(f"people with a weight above 0 (the rest are outside the subsample): {people}")
    for note in record["notes"]:
        lines.append(f"note: {note}")
    return lines
