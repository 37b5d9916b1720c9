"""The survey design: weights, strata, clusters; Taylor-linearised covariance; design df.

Variance follows the with-replacement (ultimate cluster) approximation: per-observation
influence contributions are summed to cluster totals, centred within strata and their
cross-products added up with the factor n_h / (n_h - 1) (Wolter, *Introduction to Variance
Estimation*, 2nd ed., 2007, ch. 6; Binder, Int Stat Rev 1983). The analysis domain enters
only through zero weights: every row of the design stays, so strata and clusters keep their
full count (NHANES tutorials, variance estimation module).
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import pandas as pd
from scipy import sparse

from cohortstone.config.spec import DesignSpec
from cohortstone.columns import require
from cohortstone.errors import DataError, DesignError


@dataclass(frozen=True)
class Design:
    """Design information for every row of the loaded table (nothing is ever dropped)."""

    weight: np.ndarray          # analysis weight per row (all ones without a design)
    cluster: np.ndarray         # cluster index per row, 0..n_clusters-1, nested in strata
    cluster_stratum: np.ndarray  # stratum index of each cluster
    stratum_labels: tuple       # original stratum codes, by stratum index
    single_cluster_strata: str = "error"
    design_based: bool = True   # False: no `design` block, model-based errors

    @property
    def n_clusters(self) -> int:
        return len(self.cluster_stratum)

    @property
    def n_strata(self) -> int:
        return len(self.stratum_labels)

    @cached_property
    def rows_by_cluster(self) -> tuple[np.ndarray, np.ndarray]:
        """Row numbers grouped by cluster (file order kept within a cluster) and the offsets
        where each cluster's rows start: the layout of a cluster × row indicator matrix."""
        counts = np.bincount(self.cluster, minlength=self.n_clusters)
        offsets = np.zeros(self.n_clusters + 1, dtype=np.intp)
        np.cumsum(counts, out=offsets[1:])
        small = np.uint16 if self.n_clusters <= np.iinfo(np.uint16).max else self.cluster.dtype
        rows = np.argsort(self.cluster.astype(small, copy=False), kind="stable")  # radix sort
        return rows, offsets


def _codes(values: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    codes, uniques = pd.factorize(values, sort=True)
    return codes, np.asarray(uniques)


def _check_column(frame: pd.DataFrame, key: str, column: str) -> pd.Series:
    require(frame, [(f"design.{key}", column)])
    series = frame[column]
    missing = int(series.isna().sum())
    if missing:
        raise DataError(f"design.{key}: column `{column}` has {missing} missing value(s); every "
                        "row needs a design value (rows outside the population may have weight 0).")
    return series


def make_design(frame: pd.DataFrame, spec: DesignSpec | None) -> Design:
    """Build the design from the table; without a spec every row is its own cluster, weight 1."""
    n = len(frame)
    if spec is None:
        return Design(weight=np.ones(n), cluster=np.arange(n), cluster_stratum=np.zeros(n, int),
                      stratum_labels=("all",), design_based=False)
    if spec.weight:
        raw = _check_column(frame, "weight", spec.weight)
        if not pd.api.types.is_numeric_dtype(raw):
            raise DataError(f"design.weight: column `{spec.weight}` must hold numbers, found "
                            f"text such as {raw.iloc[0]!r}.")
        weight = raw.to_numpy(dtype=float)
        bad = ~np.isfinite(weight) | (weight < 0)
        if bad.any():
            raise DataError(f"design.weight: column `{spec.weight}` has {int(bad.sum())} negative "
                            f"or infinite weight(s) (first at row {int(np.argmax(bad)) + 1}); "
                            "survey weights must be zero or positive.")
    else:
        weight = np.ones(n)
    strata_codes, strata_labels = (_codes(_check_column(frame, "strata", spec.strata))
                                   if spec.strata else (np.zeros(n, int), np.array(["all"])))
    if spec.cluster:
        raw_cluster = _check_column(frame, "cluster", spec.cluster)
        pairs = pd.MultiIndex.from_arrays([strata_codes, raw_cluster.to_numpy()])
        cluster, uniques = pd.factorize(pairs, sort=True)
        cluster_stratum = np.asarray([s for s, _ in uniques], dtype=int)
    else:  # each row is its own cluster
        cluster = np.arange(n)
        cluster_stratum = strata_codes.copy()
    design = Design(weight=weight, cluster=cluster, cluster_stratum=cluster_stratum,
                    stratum_labels=tuple(strata_labels.tolist()),
                    single_cluster_strata=spec.single_cluster_strata)
    lonely = single_cluster_strata(design)
    if lonely and spec.single_cluster_strata == "error":
        raise DesignError(
            f"design: {len(lonely)} stratum/strata hold a single cluster "
            f"({', '.join(map(str, lonely[:20]))}), so their variance cannot be estimated. "
            "Merge them with a neighbouring stratum in the data, or set "
            "`single_cluster_strata: overall_mean` to centre such a cluster on the mean of all "
            "cluster totals."
        )
    return design


def single_cluster_strata(design: Design) -> list:
    """Labels of strata that hold exactly one cluster in the full design."""
    counts = np.bincount(design.cluster_stratum, minlength=design.n_strata)
    return [design.stratum_labels[i] for i in np.flatnonzero(counts == 1)]


def cluster_totals(design: Design, matrix: np.ndarray, multiplier: np.ndarray) -> np.ndarray:
    """Sum `matrix[i] * multiplier[i]` within clusters (no n×p temporary).

    One pass over the rows: a sparse cluster × row matrix holding the multipliers times
    `matrix`; rows are added in file order within each cluster.
    """
    rows, offsets = design.rows_by_cluster
    indicator = sparse.csr_matrix((np.asarray(multiplier, dtype=float)[rows], rows, offsets),
                                  shape=(design.n_clusters, len(design.cluster)))
    return np.asarray(indicator @ np.asarray(matrix, dtype=float))


def covariance_of_totals(design: Design, totals: np.ndarray) -> np.ndarray:
    """Σ_h n_h/(n_h−1) Σ_c (z_hc − z̄_h)(z_hc − z̄_h)ᵀ over cluster totals z (with replacement).

    A stratum holding one cluster is centred on the mean of all cluster totals with factor 1
    (`overall_mean`); for estimating equations that mean is zero, as in the usual
    "adjust" convention of survey software.
    """
    strata = design.cluster_stratum
    counts = np.bincount(strata, minlength=design.n_strata).astype(float)
    sums = np.zeros((design.n_strata, totals.shape[1]))
    np.add.at(sums, strata, totals)
    lonely = counts[strata] == 1
    centre = sums[strata] / counts[strata][:, None]
    centre[lonely] = totals.mean(axis=0)
    deviations = totals - centre
    scale = np.where(lonely, 1.0, counts[strata] / np.maximum(counts[strata] - 1, 1))
    return (deviations * scale[:, None]).T @ deviations


def degrees_of_freedom(design: Design, in_domain: np.ndarray) -> int:
    """Clusters minus strata, counting only those holding a domain member (NHANES guidance)."""
    active = np.zeros(design.n_clusters, bool)
    active[design.cluster[in_domain]] = True
    n_strata = len(np.unique(design.cluster_stratum[active]))
    return int(active.sum() - n_strata)
