# Reference descriptive estimates for the tests: domain means, proportions, Korn-Graubard
# intervals, design effects and direct age standardization computed by R's survey package
# (Lumley), used ONLY to check cohortstone's own estimates in
# tests/test_prevalence_against_R.py. Nothing in the package calls or imitates this file.
# It needs base R and the `survey` package only (no jsonlite or other packages).
#
# Usage:  Rscript --vanilla estimate.R INPUT.csv KEY=VALUE ... OUTPUT.csv
#
#   ids=psu strata=strata weights=w   column names of the design (required)
#   domain=age_years >= 20            R expression (required); rows where it is NA are outside
#   lonely_psu=adjust                 sets options(survey.lonely.psu = ...); default: untouched
#   group=NEW:FROM:20,40,60           NEW = groups [20,40) [40,60) [60,Inf) of FROM, labelled
#                                     20-39 40-59 60+ (whole-number cuts; ages below the first
#                                     cut or missing -> NA)
#   prevalence=Y                      0/1 outcome Y on the domain (rows with Y missing left out):
#                                     svymean(deff = "replace"), svyciprop(method = "beta"),
#                                     degf(), nrow()
#   prevalence=Y:BY                   the same per level of BY: svyby(svymean, deff = "replace"),
#                                     svyby(svyciprop, method = "beta", vartype = "ci"), and
#                                     degf()/nrow() of subset(domain, BY == level)
#   standardize=Y:AGE:OVER:n1,n2,...  svystandardize(by = ~AGE, over = ~OVER, population =
#                                     c(n1, n2, ...)) on the domain (Y recorded); OVER = 1 means
#                                     over = ~1. Reports svymean/svyciprop(method = "beta") for
#                                     over = ~1, else svyby(svymean) and svyby(svyciprop,
#                                     vartype = "ci") per level of OVER ("standardize"), and per
#                                     level the design subset(domain, OVER == level)
#                                     standardized on its own with over = ~1
#                                     ("standardize_within")
#   mean=X   mean=X:BY                svymean / svyby(svymean) of numeric X on the domain with X
#                                     recorded (the same as na.rm = TRUE) and BY recorded
#   percent=X   percent=X:BY          svymean / svyby(svymean) of factor(X): shares of its levels
# prevalence, standardize, mean and percent may be repeated; group may be repeated and is made
# before anything else.
#
# The design is built on ALL rows (svydesign with nest = TRUE); the domain is applied
# afterwards with subset(), never by dropping rows first.
#
# OUTPUT.csv has columns task,variable,by,group,level,statistic,value (numbers printed with
# sprintf("%.17g")); task "meta" holds R_version, survey_version, lonely_psu and
# adjust_domain_lonely. The overall row has by = group = "all"; level is empty except for
# percent (the level of X). Statistics: estimate, se, deff, ci_lower, ci_upper, df (degf), nrow.

suppressPackageStartupMessages(library(survey))

args <- commandArgs(trailingOnly = TRUE)
if (length(args) < 3) stop("usage: Rscript estimate.R INPUT.csv KEY=VALUE ... OUTPUT.csv")
input <- args[1]
output <- args[length(args)]
pairs <- args[-c(1, length(args))]
if (!all(grepl("=", pairs, fixed = TRUE))) stop("arguments must be KEY=VALUE: ", pairs)
keys <- sub("=.*$", "", pairs)
values <- sub("^[^=]*=", "", pairs)
unknown <- setdiff(keys, c("ids", "strata", "weights", "domain", "lonely_psu", "group",
                           "prevalence", "standardize", "mean", "percent"))
if (length(unknown)) stop("unknown argument(s): ", paste(unknown, collapse = ", "))
one <- function(key) {
  found <- values[keys == key]
  if (length(found) != 1) stop("give `", key, "=` exactly once")
  found
}
parts <- function(value) strsplit(value, ":", fixed = TRUE)[[1]]

lonely_psu <- values[keys == "lonely_psu"]
if (length(lonely_psu)) options(survey.lonely.psu = lonely_psu)

data <- read.csv(input, stringsAsFactors = FALSE)

for (value in values[keys == "group"]) {
  p <- parts(value)
  cuts <- as.numeric(strsplit(p[3], ",", fixed = TRUE)[[1]])
  labels <- c(paste0(cuts[-length(cuts)], "-", cuts[-1] - 1), paste0(cuts[length(cuts)], "+"))
  data[[p[1]]] <- cut(data[[p[2]]], breaks = c(cuts, Inf), right = FALSE, labels = labels)
}
for (value in values[keys == "percent"]) {
  column <- parts(value)[1]
  if (!is.factor(data[[column]])) data[[column]] <- factor(as.character(data[[column]]))
}

in_domain <- eval(parse(text = one("domain")), data)
in_domain[is.na(in_domain)] <- FALSE        # missing -> outside the domain
data$in_domain__ <- in_domain

design <- svydesign(ids = as.formula(paste("~", one("ids"))),
                    strata = as.formula(paste("~", one("strata"))),
                    weights = as.formula(paste("~", one("weights"))),
                    nest = TRUE, data = data)
domain_design <- subset(design, in_domain__)

fmt <- function(x) sprintf("%.17g", as.numeric(x))
rows <- list()
add <- function(task, variable, by, group, level, statistic, value) {
  rows[[length(rows) + 1]] <<- data.frame(
    task = task, variable = variable, by = by, group = as.character(group), level = level,
    statistic = statistic, value = value, stringsAsFactors = FALSE)
}
f <- function(name) as.formula(paste("~", name))
# the domain restricted to rows where every column in `columns` is recorded
recorded <- function(d, columns) {
  keep <- complete.cases(d$variables[, columns, drop = FALSE])
  d[keep, ]
}
levels_of <- function(d, by) {
  x <- d$variables[[by]][weights(d, "sampling") != 0]
  if (is.factor(x)) levels(droplevels(x)) else sort(unique(x))
}
# svyby's rows are labelled by the level of BY
by_row <- function(tab, by, level) tab[as.character(tab[[by]]) == as.character(level), ]

for (value in values[keys == "prevalence"]) {
  p <- parts(value)
  y <- p[1]
  if (length(p) == 1) {
    d <- recorded(domain_design, y)
    m <- svymean(f(y), d, deff = "replace")
    ci <- attr(svyciprop(f(y), d, method = "beta"), "ci")
    stats <- c(estimate = coef(m)[[1]], se = SE(m)[[1]], deff = deff(m)[[1]],
               ci_lower = ci[[1]], ci_upper = ci[[2]], df = degf(d), nrow = nrow(d))
    for (s in names(stats)) add("prevalence", y, "all", "all", "", s, fmt(stats[[s]]))
  } else {
    by <- p[2]
    d <- recorded(domain_design, c(y, by))
    means <- svyby(f(y), f(by), d, svymean, deff = "replace")
    cis <- svyby(f(y), f(by), d, svyciprop, method = "beta", vartype = "ci")
    for (level in levels_of(d, by)) {
      m <- by_row(means, by, level)
      ci <- by_row(cis, by, level)
      g <- d[as.character(d$variables[[by]]) == as.character(level), ]
      stats <- c(estimate = m[[y]], se = m[["se"]], deff = m[[paste0("DEff.", y)]],
                 ci_lower = ci[["ci_l"]], ci_upper = ci[["ci_u"]], df = degf(g),
                 nrow = nrow(g))
      for (s in names(stats)) add("prevalence", y, by, level, "", s, fmt(stats[[s]]))
    }
  }
}

for (value in values[keys == "standardize"]) {
  p <- parts(value)
  y <- p[1]
  age <- p[2]
  over <- p[3]
  population <- as.numeric(strsplit(p[4], ",", fixed = TRUE)[[1]])
  d <- recorded(domain_design, c(y, age, if (over != "1") over))
  if (over == "1") {
    std <- svystandardize(d, by = f(age), over = ~1, population = population)
    m <- svymean(f(y), std)
    ci <- attr(svyciprop(f(y), std, method = "beta"), "ci")
    stats <- c(estimate = coef(m)[[1]], se = SE(m)[[1]], ci_lower = ci[[1]],
               ci_upper = ci[[2]], df = degf(std), nrow = nrow(std))
    for (s in names(stats)) add("standardize", y, "all", "all", "", s, fmt(stats[[s]]))
  } else {
    std <- svystandardize(d, by = f(age), over = f(over), population = population)
    means <- svyby(f(y), f(over), std, svymean)
    cis <- svyby(f(y), f(over), std, svyciprop, method = "beta", vartype = "ci")
    for (level in levels_of(d, over)) {
      m <- by_row(means, over, level)
      ci <- by_row(cis, over, level)
      # subsetting a post-stratified design keeps every row (weight 0 outside the subset),
      # so nrow() here counts the whole standardized design
      g <- std[as.character(std$variables[[over]]) == as.character(level), ]
      stats <- c(estimate = m[[y]], se = m[["se"]], ci_lower = ci[["ci_l"]],
                 ci_upper = ci[["ci_u"]], df = degf(g), nrow = nrow(g))
      for (s in names(stats)) add("standardize", y, over, level, "", s, fmt(stats[[s]]))
      own <- svystandardize(d[as.character(d$variables[[over]]) == as.character(level), ],
                            by = f(age), over = ~1, population = population)
      m <- svymean(f(y), own)
      ci <- attr(svyciprop(f(y), own, method = "beta"), "ci")
      stats <- c(estimate = coef(m)[[1]], se = SE(m)[[1]], ci_lower = ci[[1]],
                 ci_upper = ci[[2]], df = degf(own), nrow = nrow(own))
      for (s in names(stats)) add("standardize_within", y, over, level, "", s, fmt(stats[[s]]))
    }
  }
}

for (task in c("mean", "percent")) {
  for (value in values[keys == task]) {
    p <- parts(value)
    x <- p[1]
    names_x <- if (task == "percent") paste0(x, levels(data[[x]])) else x
    labels_x <- if (task == "percent") levels(data[[x]]) else ""
    if (length(p) == 1) {
      d <- recorded(domain_design, x)
      m <- svymean(f(x), d)
      se <- sqrt(diag(vcov(m)))
      for (k in seq_along(names_x)) {
        add(task, x, "all", "all", labels_x[k], "estimate", fmt(coef(m)[[names_x[k]]]))
        add(task, x, "all", "all", labels_x[k], "se", fmt(se[[names_x[k]]]))
      }
      add(task, x, "all", "all", "", "nrow", fmt(nrow(d)))
    } else {
      by <- p[2]
      d <- recorded(domain_design, c(x, by))
      tab <- svyby(f(x), f(by), d, svymean)
      se_names <- if (length(names_x) == 1) "se" else paste0("se.", names_x)
      for (level in levels_of(d, by)) {
        row <- by_row(tab, by, level)
        for (k in seq_along(names_x)) {
          add(task, x, by, level, labels_x[k], "estimate", fmt(row[[names_x[k]]]))
          add(task, x, by, level, labels_x[k], "se", fmt(row[[se_names[k]]]))
        }
        g <- d[as.character(d$variables[[by]]) == as.character(level), ]
        add(task, x, by, level, "", "nrow", fmt(nrow(g)))
      }
    }
  }
}

add("meta", "", "", "", "", "R_version", R.version.string)
add("meta", "", "", "", "", "survey_version", as.character(packageVersion("survey")))
add("meta", "", "", "", "", "lonely_psu", as.character(getOption("survey.lonely.psu")))
add("meta", "", "", "", "", "adjust_domain_lonely",
    as.character(getOption("survey.adjust.domain.lonely")))

write.csv(do.call(rbind, rows), output, row.names = FALSE)
