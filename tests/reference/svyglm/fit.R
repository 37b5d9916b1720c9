# Reference fit for the tests: a design-based logistic regression computed by R's survey
# package (Lumley), used ONLY to check cohortstone's own estimates in
# tests/models/test_logistic_against_R.py. Nothing in the package calls or imitates this file.
# It needs base R and the `survey` package only (as installed by .ci/run).
#
# Usage:  Rscript --vanilla fit.R INPUT.csv KEY=VALUE ... OUTPUT.csv
#
#   formula=y ~ x + age + region      model formula in R syntax (required)
#   ids=psu strata=strata weights=w   column names of the design (required)
#   domain=age >= 30 & urban == 1     R expression (required); rows where it is NA are outside
#   lonely_psu=adjust                 sets options(survey.lonely.psu = ...)
#   factor=region:north               column made a factor, reference level after the colon;
#   factor=education                  without one, the first level in C-locale / numeric order
#   cut=x:0.5,1.5                     x -> groups [-Inf,0.5) [0.5,1.5) [1.5,Inf), labelled
#                                     [1] [2] [3]
#   quantiles=x:4                     weighted quantile groups of x within the domain (complete
#                                     cases); edges by svyquantile with qrule = "math" (the
#                                     smallest value whose cumulative weight share reaches k/q);
#                                     groups (-Inf,e1] (e1,e2] ..., labelled [1] [2] ...
# factor, cut and quantiles may be repeated.
#
# The design is built on ALL rows (svydesign with nest = TRUE); the domain is applied
# afterwards with subset(), never by dropping rows first. The model is
# svyglm(family = quasibinomial()) with glm.control(epsilon = 1e-14, maxit = 100).
#
# OUTPUT.csv has columns section,name,value (numbers printed with sprintf("%.17g")):
#   meta  R_version / survey_version / lonely_psu / converged / iterations / n
#   coef  coefficient name -> estimate
#   se    coefficient name -> standard error (sqrt of the diagonal of vcov)
#   df    degf -> design degrees of freedom of the analysed domain
#   edge  "<column>[k]" -> k-th quantile edge

suppressPackageStartupMessages(library(survey))

args <- commandArgs(trailingOnly = TRUE)
if (length(args) < 3) stop("usage: Rscript fit.R INPUT.csv KEY=VALUE ... OUTPUT.csv")
input <- args[1]
output <- args[length(args)]
pairs <- args[-c(1, length(args))]
if (!all(grepl("=", pairs, fixed = TRUE))) stop("arguments must be KEY=VALUE: ", pairs)
keys <- sub("=.*$", "", pairs)
values <- sub("^[^=]*=", "", pairs)
one <- function(key, required = TRUE) {
  found <- values[keys == key]
  if (length(found) > 1) stop("give `", key, "` once")
  if (length(found) == 0) {
    if (required) stop("missing argument `", key, "=`")
    return(NULL)
  }
  found
}
# "column:rest" -> list(column = ..., rest = ... or NULL)
split_pair <- function(value) {
  column <- sub(":.*$", "", value)
  rest <- if (grepl(":", value, fixed = TRUE)) sub("^[^:]*:", "", value) else NULL
  list(column = column, rest = rest)
}
unknown <- setdiff(keys, c("formula", "ids", "strata", "weights", "domain", "lonely_psu",
                           "factor", "cut", "quantiles"))
if (length(unknown)) stop("unknown argument(s): ", paste(unknown, collapse = ", "))

lonely_psu <- one("lonely_psu", required = FALSE)
if (!is.null(lonely_psu)) options(survey.lonely.psu = lonely_psu)

data <- read.csv(input, stringsAsFactors = FALSE)
form <- as.formula(one("formula"))
model_vars <- all.vars(form)

in_domain <- eval(parse(text = one("domain")), data)
in_domain[is.na(in_domain)] <- FALSE        # missing -> outside the domain
data$in_domain__ <- in_domain
data$complete__ <- complete.cases(data[, model_vars, drop = FALSE])

make_design <- function(d) {
  svydesign(ids = as.formula(paste("~", one("ids"))),
            strata = as.formula(paste("~", one("strata"))),
            weights = as.formula(paste("~", one("weights"))),
            nest = TRUE, data = d)
}

fmt <- function(x) sprintf("%.17g", x)
rows <- list()
add <- function(section, name, value) {
  rows[[length(rows) + 1]] <<- data.frame(section = section, name = name, value = value,
                                          stringsAsFactors = FALSE)
}

# Weighted quantile edges, computed by the survey package on the analysed domain.
for (value in values[keys == "quantiles"]) {
  item <- split_pair(value)
  column <- item$column
  q <- as.integer(item$rest)
  full <- make_design(data)
  analysed <- subset(full, in_domain__ & complete__)
  est <- svyquantile(as.formula(paste("~", column)), analysed,
                     quantiles = seq_len(q - 1) / q, qrule = "math", ci = FALSE)
  edges <- as.numeric(est[[1]])
  for (k in seq_along(edges)) add("edge", sprintf("%s[%d]", column, k), fmt(edges[k]))
  data[[column]] <- cut(data[[column]], breaks = c(-Inf, edges, Inf), right = TRUE,
                        labels = sprintf("[%d]", seq_len(q)))
}

for (value in values[keys == "cut"]) {
  item <- split_pair(value)
  edges <- as.numeric(strsplit(item$rest, ",", fixed = TRUE)[[1]])
  data[[item$column]] <- cut(data[[item$column]], breaks = c(-Inf, edges, Inf), right = FALSE,
                             labels = sprintf("[%d]", seq_len(length(edges) + 1)))
}

for (value in values[keys == "factor"]) {
  item <- split_pair(value)
  column <- data[[item$column]]
  levels <- sort(unique(column[!is.na(column)]), method = "radix")
  f <- factor(column, levels = levels)
  if (!is.null(item$rest)) f <- relevel(f, ref = item$rest)
  data[[item$column]] <- f
}

design <- make_design(data)
domain_design <- subset(design, in_domain__)
fit <- svyglm(form, design = domain_design, family = quasibinomial(),
              control = glm.control(epsilon = 1e-14, maxit = 100))

add("meta", "R_version", R.version.string)
add("meta", "survey_version", as.character(packageVersion("survey")))
add("meta", "lonely_psu", getOption("survey.lonely.psu"))
add("meta", "converged", as.character(fit$converged))
add("meta", "iterations", as.character(fit$iter))
add("meta", "n", as.character(nobs(fit)))
beta <- coef(fit)
se <- sqrt(diag(vcov(fit)))
for (name in names(beta)) {
  add("coef", name, fmt(beta[[name]]))
  add("se", name, fmt(se[[name]]))
}
add("df", "degf", as.character(degf(fit$survey.design)))

write.csv(do.call(rbind, rows), output, row.names = FALSE)
