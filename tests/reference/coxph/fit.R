# Reference fits for the tests: Cox models and survival curves computed by R's survival
# package (Therneau), used ONLY to check cohortstone's own estimates in
# tests/models/test_recurrence_against_R.py. Nothing in the package calls or imitates this
# file. It needs base R and the `survival` package only (as installed by .ci/run).
#
# Usage:  Rscript --vanilla fit.R INPUT.csv KEY=VALUE ... OUTPUT.csv
#
#   time=stop_years            follow-up time (the interval's end for counting-process rows)
#   event=recurred             1 recurrence, 0 none                               (required)
#   start=start_years          interval start: counting-process rows (start, time]
#   covariates=a,b,c           right-hand side of the model (omit: curves only)
#   factor=sex:female          column made a factor, reference level after the colon;
#   factor=stone_type          without one, the first level in C-locale / numeric order
#   cut=x:1.5,2.5              x -> groups [-Inf,1.5) [1.5,2.5) [2.5,Inf), labelled [1] [2] [3]
#   cluster=clinic_id          robust variance: coxph(... + cluster(clinic_id))
#   zph=yes                    also cox.zph(fit) (transform "km", terms = TRUE)
#   curves=1,2,5,10            curves at these years:
#                                without competing and start: survfit, conf.type "log-log",
#                                  1 - S with 1 - upper, 1 - lower as its interval;
#                                with competing=died: survfit on the multi-state status
#                                  (0 censored, 1 recurrence, 2 death), conf.type "log-log",
#                                  the recurrence state's pstate, std.err, lower, upper;
#                                with start and id=person_id: survfit(..., id = person_id),
#                                  cumhaz and std.chaz (robust, summed within id)
#   group=g                    curves also by this (text) column
#   competing=died, id=person_id  see curves
#
# coxph uses ties = "efron" (the default) with coxph.control(eps = 1e-10, iter.max = 100).
# OUTPUT.csv has columns section,name,value (numbers printed with sprintf("%.17g")):
#   meta   R_version / survival_version / n / nevent / iterations
#   coef, se, naive_se   coefficient name -> estimate, sqrt(diag(var)), sqrt(diag(naive.var))
#   loglik               null / final
#   zph, zph_df          term (and GLOBAL) -> chi-square, df
#   curve, curve_se, curve_lower, curve_upper, curve_risk   "group|years" -> value
#                        (group "all" for the overall curve; only times R reports)

suppressPackageStartupMessages(library(survival))

args <- commandArgs(trailingOnly = TRUE)
if (length(args) < 3) stop("usage: Rscript fit.R INPUT.csv KEY=VALUE ... OUTPUT.csv")
input <- args[1]
output <- args[length(args)]
pairs <- args[-c(1, length(args))]
if (!all(grepl("=", pairs, fixed = TRUE))) stop("arguments must be KEY=VALUE: ", pairs)
keys <- sub("=.*$", "", pairs)
values <- sub("^[^=]*=", "", pairs)
known <- c("time", "event", "start", "covariates", "factor", "cut", "cluster", "zph",
           "curves", "group", "competing", "id")
unknown <- setdiff(keys, known)
if (length(unknown)) stop("unknown argument(s): ", paste(unknown, collapse = ", "))
one <- function(key) {
  found <- values[keys == key]
  if (length(found) > 1) stop("give `", key, "` once")
  if (length(found) == 0) NULL else found
}
split_pair <- function(value) {
  list(column = sub(":.*$", "", value),
       rest = if (grepl(":", value, fixed = TRUE)) sub("^[^:]*:", "", value) else NULL)
}

data <- read.csv(input, stringsAsFactors = FALSE)
for (value in values[keys == "cut"]) {
  item <- split_pair(value)
  edges <- as.numeric(strsplit(item$rest, ",", fixed = TRUE)[[1]])
  data[[item$column]] <- cut(data[[item$column]], breaks = c(-Inf, edges, Inf), right = FALSE,
                             labels = sprintf("[%d]", seq_len(length(edges) + 1)))
}
for (value in values[keys == "factor"]) {
  item <- split_pair(value)
  column <- data[[item$column]]
  f <- factor(column, levels = sort(unique(column[!is.na(column)]), method = "radix"))
  if (!is.null(item$rest)) f <- relevel(f, ref = item$rest)
  data[[item$column]] <- f
}

fmt <- function(x) sprintf("%.17g", x)
rows <- list()
add <- function(section, name, value) {
  rows[[length(rows) + 1]] <<- data.frame(section = section, name = name, value = value,
                                          stringsAsFactors = FALSE)
}
add("meta", "R_version", R.version.string)
add("meta", "survival_version", as.character(packageVersion("survival")))

time <- one("time"); event <- one("event"); start <- one("start")
response <- if (is.null(start)) sprintf("Surv(%s, %s)", time, event) else
  sprintf("Surv(%s, %s, %s)", start, time, event)

covariates <- one("covariates")
if (!is.null(covariates)) {
  terms <- strsplit(covariates, ",", fixed = TRUE)[[1]]
  cluster <- one("cluster")
  if (!is.null(cluster)) terms <- c(terms, sprintf("cluster(%s)", cluster))
  form <- as.formula(paste(response, "~", paste(terms, collapse = " + ")))
  fit <- coxph(form, data = data, ties = "efron",
               control = coxph.control(eps = 1e-10, iter.max = 100))
  add("meta", "n", as.character(fit$n))
  add("meta", "nevent", as.character(fit$nevent))
  add("meta", "iterations", as.character(fit$iter))
  beta <- coef(fit)
  se <- sqrt(diag(fit$var))
  naive <- if (is.null(fit$naive.var)) se else sqrt(diag(fit$naive.var))
  for (k in seq_along(beta)) {
    add("coef", names(beta)[k], fmt(beta[[k]]))
    add("se", names(beta)[k], fmt(se[[k]]))
    add("naive_se", names(beta)[k], fmt(naive[[k]]))
  }
  add("loglik", "null", fmt(fit$loglik[1]))
  add("loglik", "final", fmt(fit$loglik[2]))
  if (identical(one("zph"), "yes")) {
    table <- cox.zph(fit)$table
    for (term in rownames(table)) {
      add("zph", term, fmt(table[term, "chisq"]))
      add("zph_df", term, fmt(table[term, "df"]))
    }
  }
}

curves <- one("curves")
if (!is.null(curves)) {
  at <- as.numeric(strsplit(curves, ",", fixed = TRUE)[[1]])
  group <- one("group")
  competing <- one("competing")
  id <- one("id")
  sides <- if (is.null(group)) "1" else c("1", group)
  for (side in sides) {
    if (!is.null(competing)) {
      data$state__ <- factor(ifelse(data[[event]] == 1, 1, ifelse(data[[competing]] == 1, 2, 0)),
                             levels = 0:2, labels = c("censored", "recurrence", "death"))
      f <- survfit(as.formula(sprintf("Surv(%s, state__) ~ %s", time, side)), data = data,
                   conf.type = "log-log")
    } else if (!is.null(start)) {
      f <- survfit(as.formula(sprintf("%s ~ %s", response, side)), data = data,
                   id = data[[id]])
    } else {
      f <- survfit(as.formula(sprintf("%s ~ %s", response, side)), data = data,
                   conf.type = "log-log")
    }
    s <- summary(f, times = at)
    label <- if (is.null(s$strata)) rep("all", length(s$time)) else
      sub("^[^=]*=", "", as.character(s$strata))
    key <- sprintf("%s|%s", label, fmt(s$time))
    if (!is.null(competing)) {
      k <- which(f$states == "recurrence")
      est <- s$pstate[, k]; se <- s$std.err[, k]
      lower <- s$lower[, k]; upper <- s$upper[, k]; risk <- s$n.risk[, 1]
    } else if (!is.null(start)) {
      est <- s$cumhaz; se <- s$std.chaz; lower <- NA; upper <- NA; risk <- s$n.risk
    } else {
      est <- 1 - s$surv; se <- s$std.err; lower <- 1 - s$upper; upper <- 1 - s$lower
      risk <- s$n.risk
    }
    add("curve", key, fmt(est)); add("curve_se", key, fmt(se))
    add("curve_lower", key, fmt(lower)); add("curve_upper", key, fmt(upper))
    add("curve_risk", key, fmt(risk))
  }
}

write.csv(do.call(rbind, rows), output, row.names = FALSE)
