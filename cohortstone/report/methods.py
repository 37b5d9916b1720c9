"""The methods paragraph, generated from the config and the run (never written by hand)."""
from __future__ import annotations

from cohortstone.config.spec import Study
from cohortstone.exposure import Coding


def coding_text(coding: Coding) -> str:
    if coding.kind == "continuous":
        return f"`{coding.column}` as a continuous term (odds ratio per {coding.per:g} units)"
    levels = ", ".join(coding.levels[1:])
    what = {"cuts": "groups by cut points", "quantiles": "weighted quantile groups",
            "categorical": "categories"}[coding.kind]
    return f"`{coding.column}` in {what} {levels} against the reference {coding.reference}"


def _design_text(study: Study, info: dict) -> list[str]:
    d = study.design
    if d is None:
        return ["No survey design was given: estimates treat the data as a simple random "
                "sample (odds ratios with model-based standard errors and normal-distribution "
                "intervals; proportions with exact Clopper\u2013Pearson intervals)."]
    design = [f"strata `{d.strata}`"] if d.strata else []
    design.append(f"clusters `{d.cluster}`" if d.cluster else "each person as a cluster")
    parts = [
        f"Estimates are weighted by `{d.weight}`" if d.weight else "Estimates are unweighted",
        f" and their variances come from Taylor-series linearisation ({', '.join(design)}; "
        "clusters treated as sampled with replacement within strata). Confidence intervals and "
        "p-values use the t distribution with design degrees of freedom: clusters minus strata, "
        f"counting only those holding members of each estimate's population ({info['df_text']})."]
    text = ["".join(parts)]
    if d.single_cluster_strata == "overall_mean":
        text.append("Strata holding a single cluster were centred on the mean of all cluster "
                    "totals.")
    return text


def _models_text(study: Study, info: dict) -> list[str]:
    if not study.models:
        return []
    parts = ["Odds ratios come from logistic regression fitted by weighted maximum likelihood; "
             "intervals are Wald intervals on the log scale. People missing the outcome, the "
             "exposure or a covariate of a model left that model's population (complete-case "
             "analysis; counts are in the flow table)."]
    for model, codings in info["codings"].items():
        parts.append(f"Model {model}: " + "; ".join(coding_text(c) for c in codings) + ".")
    parts.append("For grouped exposures, the p for trend treats each group's weighted median "
                 "as a score, and the joint test of the groups is an adjusted Wald F test "
                 "(Korn & Graubard, 1990).")
    return parts


def _prevalence_text(study: Study) -> list[str]:
    spec = study.prevalence
    if spec is None:
        return []
    parts = [f"Prevalence of `{spec.outcome}` is a weighted proportion with a Korn\u2013Graubard "
             "95% interval (Clopper\u2013Pearson on the effective sample size, adjusted for the "
             "degrees of freedom). Reliability follows the NCHS Data Presentation Standards for "
             "Proportions (Parker et al., 2017): estimates with an effective sample size below "
             "30, an interval 0.30 wide or wider, or an interval wider than 0.05 and more than "
             "130% of the estimate are suppressed; fewer than 8 df, or an estimate of 0% or "
             "100%, call for review."]
    if spec.standardize is not None:
        s = spec.standardize
        source = ("the 2000 US standard population (Klein & Schoenborn, 2001)"
                  if s.name != "custom" else "user-supplied standard weights")
        groups = ", ".join(f"{label} {100 * w:.1f}%" for label, w in zip(s.labels(), s.weights))
        parts.append(f"Age-standardized estimates use direct standardization by `{s.column}` to "
                     f"{source} ({groups}); their variances are linearised like the crude ones.")
    if spec.trend:
        parts.append(f"Linear trend across `{spec.trend}` is tested by design-based logistic "
                     "regression on the cycles' order.")
    return parts


def _describe_text(study: Study) -> list[str]:
    if study.describe is None:
        return []
    return ["Table 1 gives weighted means and percentages with linearised standard errors "
            "beside unweighted counts."]


def methods_text(study: Study, info: dict) -> str:
    """One paragraph describing exactly what was done, generated from the config and the run."""
    parts = _design_text(study, info)
    if study.population:
        conds = "; ".join(f"`{c.text}`" for c in study.population)
        parts.append(f"The analysis population was {conds}; it was applied by giving everyone "
                     "else zero weight, keeping every record for variance estimation.")
    parts += _describe_text(study) + _prevalence_text(study) + _models_text(study, info)
    v = info["versions"]
    parts.append(f"Software: cohortstone {v.get('cohortstone')}, Python {v.get('python')}, "
                 f"numpy {v.get('numpy')}, pandas {v.get('pandas')}, scipy {v.get('scipy')}.")
    return " ".join(parts)
