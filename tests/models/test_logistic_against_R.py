"""cohortstone's design-based logistic regression checked against R's survey package, live.

Each test fits one model twice: with cohortstone (through `cohortstone.run` on a CSV written
to a temporary folder, or through the package's own building blocks) and with
tests/reference/svyglm/fit.R, which runs R's survey package (Lumley) — `svydesign` on all rows
with `nest = TRUE`, the domain applied with `subset()`, `svyglm(family = quasibinomial())`.
Coefficients and standard errors must agree to a relative 1e-6, and the design degrees of
freedom must be equal. One more test compares the model without a design with statsmodels.

All data are INVENTED: the package's demo survey (fiction) and clustered surveys generated
below from a seed. Nothing here describes real people.
"""
from __future__ import annotations

import secrets
import subprocess
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

import cohortstone
from cohortstone import exposure
from cohortstone.config.conditions import parse_condition
from cohortstone.config.spec import DesignSpec, ModelSpec
from cohortstone.design import make_design, single_cluster_strata
from cohortstone.exposure import cut_labels, quantile_labels
from cohortstone.models import logistic
from cohortstone.population import domain
from cohortstone.sources import demo

FIT_R = Path(__file__).resolve().parents[1] / "reference" / "svyglm" / "fit.R"
RTOL = 1e-6
DESIGN = {"weight": "weight", "strata": "strata", "cluster": "psu"}
ADJUST = ["age_years", "sex", "bmi", "diabetes"]


# ---- the R side -----------------------------------------------------------------------------


@dataclass(frozen=True)
class RFit:
    coef: pd.Series
    se: pd.Series
    df: int
    edges: pd.Series
    meta: dict

    def about(self) -> str:
        return (f"{self.meta['R_version']}, survey {self.meta['survey_version']}, "
                f"survey.lonely.psu = {self.meta['lonely_psu']}")


def r_arguments(spec: dict) -> list[str]:
    """The KEY=VALUE arguments of fit.R for a spec written as a dict in the tests."""
    args = [f"{key}={spec[key]}" for key in ("formula", "ids", "strata", "weights", "domain",
                                             "lonely_psu") if key in spec]
    for column, reference in spec.get("factors", {}).items():
        args.append(f"factor={column}" + ("" if reference is None else f":{reference}"))
    for column, edges in spec.get("cuts", {}).items():
        args.append(f"cut={column}:" + ",".join(repr(float(e)) for e in edges))
    for column, groups in spec.get("quantiles", {}).items():
        args.append(f"quantiles={column}:{int(groups)}")
    return args


def fit_in_R(rscript: str, csv: Path, spec: dict, folder: Path) -> RFit:
    """Run fit.R on `csv` with `spec`; read back the full-precision coefficients and errors."""
    spec = {"ids": "psu", "strata": "strata", "weights": "weight", **spec}
    out = folder / "r_fit.csv"
    done = subprocess.run([rscript, "--vanilla", str(FIT_R), str(csv), *r_arguments(spec),
                           str(out)], capture_output=True, text=True, timeout=300)
    if done.returncode != 0 or not out.is_file():
        pytest.fail(f"the R reference fit failed (exit {done.returncode}) for spec {spec}:\n"
                    f"{done.stderr}")
    table = pd.read_csv(out, dtype=str, keep_default_na=False)
    part = {s: g.set_index("name")["value"] for s, g in table.groupby("section")}
    meta = part["meta"].to_dict()
    assert meta["converged"] == "TRUE", f"R's svyglm did not converge: {meta}\n{done.stderr}"
    fit = RFit(coef=part["coef"].astype(float), se=part["se"].astype(float),
               df=int(part["df"]["degf"]),
               edges=part.get("edge", pd.Series(dtype=str)).astype(float), meta=meta)
    print(f"R reference: {fit.about()}")
    return fit


# ---- the cohortstone side -------------------------------------------------------------------


def r_name(term: str, level: str, codings: dict) -> str:
    """The name R gives the coefficient of cohortstone's `term` / `level`.

    Text or numeric categories: R pastes the level to the column name (`sexmale`). Cut and
    quantile groups: fit.R labels them `[1]`, `[2]`, ... in their natural order.
    """
    if not level:
        return term
    coding = codings.get(term)
    if coding is not None and coding.kind in ("cuts", "quantiles"):
        natural = (cut_labels if coding.kind == "cuts" else quantile_labels)(coding.edges)
        return f"{term}[{natural.index(level) + 1}]"
    return f"{term}{level}"


def run_table(config: dict) -> tuple[pd.DataFrame, dict]:
    """`cohortstone.run` without writing; the non-reference rows of the table, and codings."""
    results = cohortstone.run(config, write=False)
    table = results.odds_ratios
    assert (table["flag"] == "").all(), f"cohortstone flagged the fit: {set(table['flag'])}"
    codings = {c.column: c for c in results.manifest["codings"][config["models"][0]["name"]]}
    estimated = table[table["se"].notna()].copy()
    estimated["r_name"] = [r_name(t, lv, codings) for t, lv in
                           zip(estimated["term"], estimated["level"])]
    return estimated, codings


def table_config(csv: Path, population: list[str], model: dict, design: dict | None = DESIGN
                 ) -> dict:
    config = {"name": "against-r", "data": {"source": "table", "path": str(csv)},
              "population": population,
              "models": [{"name": "m", "outcome": "stone_ever", **model}]}
    if design is not None:
        config["design"] = design
    return config


def assert_table_matches(ours: pd.DataFrame, r: RFit, context: str = "") -> None:
    """Every reported coefficient and standard error equals R's to RTOL; df equal too.

    The table reports log odds ratios per `per` units of a continuous term, so R's
    coefficient and standard error are multiplied by `per` there.
    """
    where = f"{context}; {r.about()}"
    # every coefficient R estimated (but the intercept, which the table does not report)
    assert sorted(ours["r_name"]) == sorted(set(r.coef.index) - {"(Intercept)"}), where
    scale = np.where(ours["per"].notna(), ours["per"], 1.0)
    assert_allclose(ours["log_odds_ratio"].to_numpy(), r.coef[ours["r_name"]].to_numpy() * scale,
                    rtol=RTOL, err_msg=f"log odds ratios differ from R ({where})")
    assert_allclose(ours["se"].to_numpy(), r.se[ours["r_name"]].to_numpy() * scale,
                    rtol=RTOL, err_msg=f"standard errors differ from R ({where})")
    # R survey package (Lumley), degf() of the design svyglm analysed (domain, complete rows)
    assert set(ours["df"]) == {r.df}, f"design df differ from R's degf(): {where}"


# ---- demo data as files ---------------------------------------------------------------------


@pytest.fixture(scope="module")
def demo_csv(tmp_path_factory) -> Path:
    """The invented demo survey, as the CSV both sides read."""
    path = tmp_path_factory.mktemp("demo") / "demo_survey.csv"
    demo.load().to_csv(path, index=False)
    return path


@pytest.fixture(scope="module")
def lonely_csv(tmp_path_factory) -> Path:
    """The demo survey edited so strata 4 and 9 each hold a single cluster (tests only)."""
    survey = demo.load()
    survey.loc[survey["strata"].isin([4, 9]), "psu"] = 1
    path = tmp_path_factory.mktemp("lonely") / "demo_single_cluster_strata.csv"
    survey.to_csv(path, index=False)
    return path


# ---- 1-4: the demo survey through cohortstone.run -------------------------------------------


@pytest.mark.r_reference
def test_matches_R_survey_svyglm_demo_adults_water_per_litre(rscript, demo_csv, tmp_path):
    config = table_config(demo_csv, ["age_years >= 20"],
                          {"exposure": "water_l_day", "per": 1, "adjust": ADJUST})
    ours, _ = run_table(config)
    # R survey package (Lumley), svyglm with quasibinomial family, domain by subset()
    r = fit_in_R(rscript, demo_csv, {
        "formula": "stone_ever ~ water_l_day + age_years + sex + bmi + diabetes",
        "domain": "age_years >= 20", "factors": {"sex": "female"}}, tmp_path)
    assert_table_matches(ours, r, context="demo adults, water per litre")


@pytest.mark.r_reference
def test_matches_R_survey_svyglm_in_a_narrower_domain_men_40_and_over(rscript, demo_csv,
                                                                       tmp_path):
    # per 0.5 litre: the table's log odds ratio is 0.5 × R's coefficient
    config = table_config(demo_csv, ["age_years >= 40", "sex == 'male'"],
                          {"exposure": "water_l_day", "per": 0.5,
                           "adjust": ["age_years", "bmi", "diabetes"]})
    ours, _ = run_table(config)
    assert (ours["term"] == "water_l_day").sum() == 1 and ours["per"].iloc[0] == 0.5
    # R survey package (Lumley), svyglm with quasibinomial family, domain by subset()
    r = fit_in_R(rscript, demo_csv, {
        "formula": "stone_ever ~ water_l_day + age_years + bmi + diabetes",
        "domain": "age_years >= 40 & sex == 'male'"}, tmp_path)
    assert_table_matches(ours, r, context="demo men aged 40 and over, water per 0.5 l")


@pytest.mark.r_reference
def test_matches_R_survey_svyglm_with_cut_exposure_groups(rscript, demo_csv, tmp_path):
    config = table_config(demo_csv, ["age_years >= 20"],
                          {"exposure": "water_l_day", "cuts": [0.5, 1.5], "adjust": ADJUST,
                           "reference": {"sex": "female"}})
    ours, _ = run_table(config)
    assert list(ours.loc[ours["term"] == "water_l_day", "r_name"]) == [
        "water_l_day[2]", "water_l_day[3]"]
    # R survey package (Lumley), svyglm with quasibinomial family; groups by
    # cut(c(-Inf, 0.5, 1.5, Inf), right = FALSE)
    r = fit_in_R(rscript, demo_csv, {
        "formula": "stone_ever ~ water_l_day + age_years + sex + bmi + diabetes",
        "domain": "age_years >= 20", "factors": {"sex": "female"},
        "cuts": {"water_l_day": [0.5, 1.5]}}, tmp_path)
    assert_table_matches(ours, r, context="demo adults, water cut at 0.5 and 1.5 l")


@pytest.mark.r_reference
def test_matches_R_survey_svyglm_with_weighted_quartiles(rscript, demo_csv, tmp_path):
    config = table_config(demo_csv, ["age_years >= 20"],
                          {"exposure": "total_fluid_l_day", "quantiles": 4,
                           "adjust": ADJUST + ["race_ethnicity"]})
    ours, codings = run_table(config)
    # R survey package (Lumley): edges by svyquantile(qrule = "math") on the analysed domain,
    # i.e. the smallest value whose cumulative weight share reaches k/4 — computed in R, not
    # passed from Python
    r = fit_in_R(rscript, demo_csv, {
        "formula": "stone_ever ~ total_fluid_l_day + age_years + sex + bmi + diabetes"
                   " + race_ethnicity",
        "domain": "age_years >= 20", "factors": {"sex": "female", "race_ethnicity": None},
        "quantiles": {"total_fluid_l_day": 4}}, tmp_path)
    assert codings["total_fluid_l_day"].edges == tuple(r.edges), r.about()
    # R survey package (Lumley), svyglm with quasibinomial family on the quartile groups
    assert_table_matches(ours, r, context="demo adults, total fluid quartiles")


@pytest.mark.r_reference
def test_matches_R_survey_svyglm_with_single_cluster_strata_adjusted(rscript, lonely_csv,
                                                                     tmp_path):
    design = {**DESIGN, "single_cluster_strata": "overall_mean"}
    config = table_config(lonely_csv, ["age_years >= 20"],
                          {"exposure": "water_l_day", "adjust": ADJUST}, design=design)
    frame = pd.read_csv(lonely_csv)
    assert single_cluster_strata(make_design(frame, DesignSpec(**design))) == [4, 9]
    ours, _ = run_table(config)
    # R survey package (Lumley), svyglm with quasibinomial family,
    # options(survey.lonely.psu = "adjust")
    r = fit_in_R(rscript, lonely_csv, {
        "formula": "stone_ever ~ water_l_day + age_years + sex + bmi + diabetes",
        "domain": "age_years >= 20", "factors": {"sex": "female"},
        "lonely_psu": "adjust"}, tmp_path)
    assert r.meta["lonely_psu"] == "adjust"
    assert_table_matches(ours, r, context="demo with single-cluster strata 4 and 9")


# ---- 5: clustered designs the tests have not seen before ------------------------------------

FIXED = [(11, "continuous"), (2024, "cuts"), (314159, "quantiles"), (8675309, "continuous"),
         (97, "quantiles")]
KINDS = ("continuous", "cuts", "quantiles")
CUTS = (1.0, 2.0)


def synthetic_survey(seed: int) -> pd.DataFrame:
    """An INVENTED stratified cluster sample for tests only (not real people, not findings).

    10-30 strata of 2-4 clusters (numbered 1.. within each stratum), 15-60 people a cluster,
    unequal weights, a cluster effect on the outcome and the exposure, a 3-level text category,
    a 3-level numeric code, a cluster-level domain variable, and a few missing values.
    """
    rng = np.random.default_rng(seed)
    n_strata = int(rng.integers(10, 31))
    per_stratum = rng.integers(2, 5, size=n_strata)
    strata = np.repeat(np.arange(1, n_strata + 1), per_stratum)
    psu = np.concatenate([np.arange(1, k + 1) for k in per_stratum])
    sizes = rng.integers(15, 61, size=len(strata))
    n = int(sizes.sum())

    def by_cluster(values):
        return np.repeat(values, sizes)

    effect = by_cluster(rng.normal(0, 0.4, len(strata)))
    urban = by_cluster((rng.random(len(strata)) < 0.8).astype(int))
    age = np.round(rng.uniform(18, 85, n), 1)
    age[rng.random(n) < 0.01] = np.nan
    region = rng.choice(["east", "north", "south"], size=n, p=[0.3, 0.45, 0.25])
    education = rng.choice([1, 2, 3], size=n, p=[0.25, 0.45, 0.30])
    cluster_intake = by_cluster(rng.normal(0, 0.2, len(strata)))
    intake = np.round(rng.gamma(2.0, 0.75, n) * np.exp(cluster_intake), 3)
    bmi = np.round(rng.normal(27, 5, n), 1)
    bmi[rng.random(n) < 0.03] = np.nan
    eta = (-1.1 - 0.25 * intake + 0.02 * (np.nan_to_num(age, nan=50) - 50)
           + np.select([region == "east", region == "south"], [0.3, -0.2], 0.0)
           + 0.15 * (education - 2) + 0.03 * (np.nan_to_num(bmi, nan=27) - 27) + effect)
    stone = (rng.random(n) < 1 / (1 + np.exp(-eta))).astype(float)
    base = np.repeat(rng.uniform(200, 5000, n_strata), per_stratum)
    weight = np.round(by_cluster(base) * rng.lognormal(0, 0.5, n), 2)
    return pd.DataFrame({"strata": by_cluster(strata), "psu": by_cluster(psu), "weight": weight,
                         "urban": urban, "age_years": age, "region": region,
                         "education": education, "intake_l_day": intake, "bmi": bmi,
                         "stone_ever": stone})


def check_random_design(rscript: str, seed: int, kind: str, folder: Path) -> None:
    replay = (f"synthetic design seed={seed}, exposure {kind}; replay by adding ({seed}, "
              f"{kind!r}) to FIXED in {Path(__file__).name}")
    frame = synthetic_survey(seed)
    csv = folder / f"synthetic_{seed}.csv"
    frame.to_csv(csv, index=False)
    coding = {"cuts": {"cuts": CUTS}, "quantiles": {"quantiles": 3}}.get(kind, {"per": 1.0})
    spec = ModelSpec(name="m", type="logistic", outcome="stone_ever", exposure="intake_l_day",
                     adjust=("age_years", "region", "education", "bmi"),
                     categorical=("education",), reference=(("region", "north"),), **coding)
    # cohortstone's own pieces, in the order of the pipeline: domain -> design -> coding -> fit
    population, _ = domain(frame, (parse_condition("age_years >= 30"),
                                   parse_condition("urban == 1")))
    design = make_design(frame, DesignSpec(weight="weight", strata="strata", cluster="psu"))
    matrix = exposure.build(frame, spec, population, design.weight)
    w = design.weight * matrix.in_model
    fit = logistic.fit(matrix.x, matrix.y, w, design, matrix.names())
    assert fit.converged and not fit.flag, f"{fit.flag} ({replay})"
    codings = {c.column: c for c in matrix.codings}
    names = ["(Intercept)" if c.role == "intercept" else r_name(c.term, c.level, codings)
             for c in matrix.columns]

    r_spec = {"formula": "stone_ever ~ intake_l_day + age_years + region + education + bmi",
              "domain": "age_years >= 30 & urban == 1",
              "factors": {"region": "north", "education": None}}
    if kind == "cuts":
        r_spec["cuts"] = {"intake_l_day": list(CUTS)}
    if kind == "quantiles":
        r_spec["quantiles"] = {"intake_l_day": 3}
    # R survey package (Lumley), svyglm with quasibinomial family, domain by subset()
    r = fit_in_R(rscript, csv, r_spec, folder)
    where = f"{replay}; {r.about()}"
    assert sorted(names) == sorted(r.coef.index), where
    if kind == "quantiles":
        # R survey package (Lumley), svyquantile with qrule = "math"
        assert codings["intake_l_day"].edges == tuple(r.edges), where
    assert_allclose(fit.coef, r.coef[names].to_numpy(), rtol=RTOL,
                    err_msg=f"coefficients differ from R ({where})")
    assert_allclose(fit.se, r.se[names].to_numpy(), rtol=RTOL,
                    err_msg=f"standard errors differ from R ({where})")
    # R survey package (Lumley), degf() of the design svyglm analysed (domain, complete rows)
    assert fit.df == r.df, f"design df {fit.df} vs R's degf() {r.df} ({where})"


@pytest.mark.r_reference
@pytest.mark.parametrize("seed, kind", FIXED, ids=[f"seed{s}-{k}" for s, k in FIXED])
def test_matches_R_survey_svyglm_on_random_clustered_designs(rscript, tmp_path, seed, kind):
    check_random_design(rscript, seed, kind, tmp_path)


@pytest.mark.r_reference
def test_matches_R_survey_svyglm_on_a_random_design_drawn_fresh_this_run(rscript, tmp_path):
    seed = secrets.randbits(32)
    kind = KINDS[seed % len(KINDS)]
    print(f"fresh synthetic design: seed={seed}, exposure {kind}")
    try:
        check_random_design(rscript, seed, kind, tmp_path)
    except (Exception, pytest.fail.Exception) as exc:  # whatever failed, name the seed
        raise AssertionError(f"fresh synthetic design seed={seed} (exposure {kind}) failed; "
                             f"replay by adding ({seed}, {kind!r}) to FIXED: {exc}") from exc


# ---- no design: model-based errors ----------------------------------------------------------


def test_matches_statsmodels_glm_binomial_without_design():
    config = {"name": "no-design", "data": {"source": "demo"}, "population": ["age_years >= 20"],
              "models": [{"name": "m", "outcome": "stone_ever", "exposure": "water_l_day",
                          "adjust": ADJUST}]}
    ours, _ = run_table(config)
    assert ours["df"].isna().all()  # no design: normal reference, no df

    survey = demo.load()
    used = survey[(survey["age_years"] >= 20)].dropna(subset=["stone_ever", "water_l_day",
                                                              *ADJUST])
    x = pd.DataFrame({"const": 1.0, "water_l_day": used["water_l_day"],
                      "age_years": used["age_years"],
                      "sexmale": (used["sex"] == "male").astype(float), "bmi": used["bmi"],
                      "diabetes": used["diabetes"]})
    import statsmodels.api as sm
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        # statsmodels GLM, Binomial family with logit link (maximum likelihood, model-based bse)
        reference = sm.GLM(used["stone_ever"], x, family=sm.families.Binomial()).fit(tol=1e-13)
    names = list(ours["r_name"])
    assert sorted(names) == sorted(set(x.columns) - {"const"})
    assert_allclose(ours["log_odds_ratio"].to_numpy(), reference.params[names].to_numpy(),
                    rtol=RTOL, err_msg="coefficients differ from statsmodels")
    assert_allclose(ours["se"].to_numpy(), reference.bse[names].to_numpy(), rtol=RTOL,
                    err_msg="standard errors differ from statsmodels")
