"""Pieces shared by the benchmark scripts: finding R, running an R script on a binary matrix,
describing the BLAS in use, and PASS/MISS marks. Benchmarks print figures; nothing here times
anything in the test suite."""
from __future__ import annotations

import gc
import os
import shutil
import subprocess
import sys
import tracemalloc
from pathlib import Path
from typing import Callable

import numpy as np


# R lines that read the matrix written by `run_r_on_matrix` into a data frame `d`
R_READ_MATRIX = r"""
args <- commandArgs(trailingOnly = TRUE)
path <- args[1]; n <- as.integer(args[2]); k <- as.integer(args[3])
cols <- strsplit(args[4], ",", fixed = TRUE)[[1]]
con <- file(path, "rb")
v <- readBin(con, what = "double", n = n * k, size = 8, endian = "little")
close(con)
stopifnot(length(v) == n * k)
d <- as.data.frame(matrix(v, nrow = n, ncol = k))
rm(v)
names(d) <- cols
"""


def peak_bytes(work: Callable[[], object]) -> int:
    """Peak memory allocated while `work()` runs, above what was allocated before."""
    gc.collect()
    tracemalloc.start()
    try:
        base = tracemalloc.get_traced_memory()[0]
        tracemalloc.reset_peak()
        work()
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    return peak - base


def r_available(package: str) -> tuple[bool, str]:
    """(True, path of Rscript) when R and `package` load; else (False, why not)."""
    rscript = shutil.which("Rscript")
    if not rscript:
        return False, "Rscript not found"
    probe = subprocess.run([rscript, "-e", f"cat(requireNamespace('{package}', quietly=TRUE))"],
                           capture_output=True, text=True)
    if probe.stdout.strip() != "TRUE":
        return False, f"R package `{package}` not installed"
    return True, rscript


def run_r_on_matrix(rscript: str, script: str, matrix: np.ndarray, columns: list[str],
                    workdir: Path, *extra: str) -> dict:
    """Write `matrix` as little-endian doubles in column-major order (as R's matrix() fills),
    run `script` on it and read back its `KEY value ...` lines: RTIME, RTIME_PLAIN, RITER,
    RCOEF and RSE."""
    path = workdir / "data.f64"
    np.asfortranarray(matrix.astype("<f8")).ravel(order="F").tofile(path)
    program = workdir / "fit.R"
    program.write_text(script)
    out = subprocess.run([rscript, str(program), str(path), str(matrix.shape[0]),
                          str(matrix.shape[1]), ",".join(columns), *extra],
                         capture_output=True, text=True)
    if out.returncode != 0:
        raise RuntimeError(f"Rscript failed:\n{out.stderr[-2000:]}")
    found: dict = {}
    names = {"RTIME": "seconds", "RTIME_PLAIN": "plain_seconds"}
    for line in out.stdout.splitlines():
        key, *vals = line.split()
        if key in names:
            found[names[key]] = float(vals[0])
        elif key in ("RCOEF", "RSE"):
            found[key] = np.array([float(v) for v in vals])
        elif key == "RITER":
            found["iter"] = int(vals[0])
    return found


def preamble(no_r: bool, package: str) -> tuple[bool, str]:
    """Print the machine facts every benchmark starts with; (use R?, Rscript path or why not)."""
    print(f"python {sys.version.split()[0]}, numpy {np.__version__}, "
          f"cpus available {len(os.sched_getaffinity(0))}")
    print(f"BLAS: {blas_info()}")
    use_r, r_note = (False, "--no-r given") if no_r else r_available(package)
    if not use_r:
        print(f"R comparison skipped: {r_note}")
    print()
    return use_r, r_note


def blas_info() -> str:
    env = ", ".join(f"{k}={os.environ[k]}" for k in sorted(os.environ)
                    if k.startswith(("OPENBLAS", "OMP_", "MKL_", "BLIS_")))
    try:
        from threadpoolctl import threadpool_info
        pools = "; ".join(f"{p.get('internal_api')} {p.get('version')} "
                          f"threads={p.get('num_threads')}" for p in threadpool_info())
    except ImportError:
        pools = "threadpoolctl not installed (thread count unknown)"
    return f"{pools}; env: {env or 'no BLAS/OpenMP variables set'}"


def mark(ok: bool | None) -> str:
    return "n/a" if ok is None else ("PASS" if ok else "MISS")
