"""`cohortstone fetch`: download the national survey's public transport files into a folder.

Each file is streamed into `<name>.part` beside its final name and renamed into place only
once it is complete and starts like a SAS transport file, so a good file is never replaced by
a partial one. A download cut short leaves its `.part`; running the same command again asks
the server for the rest (an HTTP Range request) and carries on from there. Files already
present are kept (`refresh` downloads them again, still replacing only when complete). The
SHA-256 of every file is written to `checksums.sha256` (one `<hex>  <file>` line per file).
"""
from __future__ import annotations

import http.client
import os
import sys
import tempfile
import urllib.error
import urllib.request
from dataclasses import dataclass
from pathlib import Path
from typing import TextIO

from cohortstone import __version__
from cohortstone.checksums import sha256
from cohortstone.errors import ConfigError, DataError
from cohortstone.sources.nhanes.cycles import COMPONENTS, CYCLES

# The publisher's public folder (memory: the codebook pages are at
# <BASE>/<first year>/DataFiles/<FILE>.htm [domain.md], the data files beside them as .xpt).
BASE = "https://wwwn.cdc.gov/Nchs/Data/Nhanes/Public"
CHECKSUMS = "checksums.sha256"
TRANSPORT_HEADER = b"HEADER RECORD*******LIB"   # SAS transport files (v5 and v8) start so
CHUNK = 1 << 16


@dataclass(frozen=True)
class Download:
    cycle: str
    file: str        # the publisher's name, e.g. DEMO_J.xpt
    url: str


def _names(values: list[str] | None, known: dict, what: str, default: list[str]) -> list[str]:
    if not values:
        return default
    names = [n.strip() for v in values for n in v.split(",") if n.strip()]
    unknown = [n for n in names if n not in known]
    if unknown:
        raise ConfigError(f"--{what}: unknown {what} {', '.join(map(repr, unknown))}; known: "
                          f"{', '.join(known)}.")
    return list(dict.fromkeys(names))


def url_for(base: str, cycle: str, stem: str) -> str:
    """`<base>/<first year>/DataFiles/<stem>.xpt`, or `base` itself as a template holding
    `{file}` (and optionally `{year}`, `{cycle}`) for another layout."""
    first = str(CYCLES[cycle].first_year)
    if "{file}" in base:
        return base.replace("{year}", first).replace("{cycle}", cycle).replace("{file}", stem)
    return f"{base.rstrip('/')}/{first}/DataFiles/{stem}.xpt"


def plan(cycles: list[str] | None, components: list[str] | None, base: str = BASE
         ) -> list[Download]:
    """Every file of the named cycles × components, with its address."""
    if not cycles:
        raise ConfigError("--cycles: name at least one cycle, e.g. --cycles 2015-2016,2017-2020.")
    cycle_names = _names(cycles, CYCLES, "cycles", [])
    component_names = _names(components, COMPONENTS, "components", list(COMPONENTS))
    out = []
    for cycle in cycle_names:
        for component in component_names:
            stem = CYCLES[cycle].file_stem(COMPONENTS[component])
            out.append(Download(cycle, f"{stem}.xpt", url_for(base, cycle, stem)))
    return out


class _Bar:
    """A one-line progress bar: redrawn in place on a terminal, printed once when done else."""

    def __init__(self, stream: TextIO, name: str, total: int | None, start: int = 0):
        self.stream, self.name, self.total, self.done = stream, name, total, start
        self.live = hasattr(stream, "isatty") and stream.isatty()
        self.shown = -1

    def text(self) -> str:
        if not self.total:
            return f"{self.name:<16} {_size(self.done)}"
        share = min(self.done / self.total, 1.0)
        bar = "#" * int(share * 30)
        return f"{self.name:<16} [{bar:<30}] {share:4.0%} {_size(self.done)} of {_size(self.total)}"

    def add(self, n: int) -> None:
        self.done += n
        percent = int(100 * self.done / self.total) if self.total else self.done >> 20
        if self.live and percent != self.shown:
            self.shown = percent
            self.stream.write("\r" + self.text())
            self.stream.flush()

    def close(self, note: str = "") -> None:
        self.stream.write(("\r" if self.live else "") + self.text() + note + "\n")
        self.stream.flush()


def _size(n: int) -> str:
    return f"{n / 1e6:.1f} MB" if n >= 1e6 else f"{n / 1e3:.0f} kB"


def _is_transport(path: Path) -> bool:
    with open(path, "rb") as handle:
        return handle.read(len(TRANSPORT_HEADER)) == TRANSPORT_HEADER


def _get(item: Download, part: Path, stream: TextIO, timeout: float) -> None:
    """Stream `item` into `part`, resuming from its size; raise OSError-like on failure."""
    offset = part.stat().st_size if part.exists() else 0
    headers = {"User-Agent": f"cohortstone/{__version__}"}
    if offset:
        headers["Range"] = f"bytes={offset}-"
    try:
        response = urllib.request.urlopen(urllib.request.Request(item.url, headers=headers),
                                          timeout=timeout)
    except urllib.error.HTTPError as exc:
        if exc.code == 416 and offset:       # nothing left to send, or a stale part: restart
            part.unlink()
            return _get(item, part, stream, timeout)
        raise
    with response:
        resumed = response.status == 206
        if not resumed:
            offset = 0
        length = response.headers.get("Content-Length")
        total = offset + int(length) if length is not None else None
        bar = _Bar(stream, item.file, total, offset)
        with open(part, "ab" if resumed else "wb") as out:
            try:
                while block := response.read(CHUNK):
                    out.write(block)
                    bar.add(len(block))
            except (http.client.IncompleteRead, OSError):
                pass
        if total is not None and bar.done < total:
            bar.close(" interrupted")
            raise _Interrupted(f"{item.file}: interrupted after {bar.done} of {total} bytes")
        bar.close(" resumed" if resumed else "")


class _Interrupted(Exception):
    pass


def _write_checksums(folder: Path, sums: dict[str, str]) -> None:
    text = "".join(f"{sums[name]}  {name}\n" for name in sorted(sums))
    handle, temporary = tempfile.mkstemp(prefix=".checksums-", dir=folder)
    with os.fdopen(handle, "w", encoding="utf-8", newline="\n") as out:
        out.write(text)
    os.replace(temporary, folder / CHECKSUMS)


def _read_checksums(folder: Path) -> dict[str, str]:
    path = folder / CHECKSUMS
    if not path.is_file():
        return {}
    sums = {}
    for line in path.read_text(encoding="utf-8").splitlines():
        digest, _, name = line.partition("  ")
        if len(digest) == 64 and name:
            sums[name] = digest
    return sums


def fetch(folder: Path, cycles: list[str] | None, components: list[str] | None = None,
          base: str = BASE, refresh: bool = False, stream: TextIO | None = None,
          timeout: float = 60.0) -> list[str]:
    """Download what is missing; return one status line per file. Failures -> `DataError`.

    The progress bar goes to `stream` (standard error by default)."""
    stream = sys.stderr if stream is None else stream
    items = plan(cycles, components, base)
    folder.mkdir(parents=True, exist_ok=True)
    on_disk = {p.name.upper(): p for p in folder.iterdir() if p.is_file()}
    sums = _read_checksums(folder)
    lines, failures = [], []
    for item in items:
        existing = on_disk.get(item.file.upper())
        target = existing if existing is not None else folder / item.file
        if existing is not None and not refresh and _is_transport(existing):
            sums[existing.name] = sha256(existing)
            lines.append(f"{existing.name}: already present")
            continue
        part = target.with_name(target.name + ".part")
        try:
            _get(item, part, stream, timeout)
        except (_Interrupted, urllib.error.URLError, OSError, http.client.HTTPException) as exc:
            failures.append(f"{item.file} from {item.url}: {_reason(exc)}")
            continue
        if not _is_transport(part):
            part.unlink()
            failures.append(f"{item.file} from {item.url}: what arrived is not a SAS transport "
                            "file (perhaps an error page); nothing was kept")
            continue
        os.replace(part, target)
        sums[target.name] = sha256(target)
        lines.append(f"{target.name}: downloaded")
    _write_checksums(folder, sums)
    if failures:
        done = len(items) - len(failures)
        raise DataError(f"fetch: {len(failures)} of {len(items)} file(s) could not be "
                        f"downloaded into {str(folder)!r} ({done} present or downloaded): "
                        f"{'; '.join(failures)}. Run the same command again to resume; "
                        "partial downloads are kept as .part files and no complete file was "
                        "replaced.")
    return lines


def _reason(exc: Exception) -> str:
    if isinstance(exc, urllib.error.HTTPError):
        return f"the server answered HTTP {exc.code} {exc.reason}"
    if isinstance(exc, urllib.error.URLError):
        return f"the address could not be reached ({exc.reason})"
    return str(exc) or type(exc).__name__
