# Reference merge for the tests: the national survey's transport files read and merged in R,
# written independently of cohortstone and used ONLY to check it in
# tests/sources/test_nhanes_against_R.py. Nothing in the package calls or imitates this file.
# It needs base R only (`foreign`, a recommended package shipped with R, reads the files).
#
# Usage:  Rscript --vanilla merge.R DIR CYCLES LEVEL MAP.csv OUTPUT.csv
#
#   DIR      folder of the .XPT files (names in any letter case)
#   CYCLES   comma-separated, e.g. 2013-2014,2015-2016 or 2015-2016,2017-2020
#   LEVEL    interview | exam | day1 : the subsample whose weight is used
#   MAP.csv  columns kind,prefix,group,diet_group,value: kind "row" is a food-code prefix
#            row, kind "sum" a summed group (value = its parts joined by +), kind "diet"
#            the energy threshold (value, kcal per 100 g)
#
# The rules restated from ../shared/domain.md, with its source keys:
#   files DEMO/BMX/DIQ/KIQ_U/DR1TOT/DR1IFF with suffix _E.._J, _L, or prefix P_   [CB-*]
#   weights WTINT2YR/WTMEC2YR/WTDRD1; pre-pandemic WTINTPRP/WTMECPRP/WTDRD1PP     [TUT-W][CODE-PP]
#   combined weight = weight * years / total years, 2 per cycle, 3.2 pre-pandemic [AG-11-16][AKIN]
#   KIQ026/KIQ029/DIQ010: 1 -> 1, 2 -> 0 (DIQ010 3 -> 0), 7/9 -> NA; KID028 777/999 -> NA;
#   KIQ029 and KID028 are 0 when KIQ026 = 2 (skip pattern)                         [CB-*]
#   age top-coded at 80 [OSQ-J]; intake only for DR1DRSTZ = 1 [DR-CB]
#   total fluid = moisture, plus plain water in a cycle where moisture < water - 1 g in more
#   than 1% of recalls with plain water (cohortstone's stated rule)
#   strata nested within cycle: "<cycle>:<SDMVSTRA>"

suppressPackageStartupMessages(library(foreign))

args <- commandArgs(trailingOnly = TRUE)
if (length(args) != 5) stop("usage: Rscript merge.R DIR CYCLES LEVEL MAP.csv OUTPUT.csv")
folder <- args[1]
cycles <- strsplit(args[2], ",", fixed = TRUE)[[1]]
level <- args[3]
map <- read.csv(args[4], colClasses = "character")
output <- args[5]

info <- data.frame(
  cycle = c("2007-2008", "2009-2010", "2011-2012", "2013-2014", "2015-2016", "2017-2018",
            "2017-2020", "2021-2023"),
  letter = c("E", "F", "G", "H", "I", "J", "P", "L"),
  years = c(2, 2, 2, 2, 2, 2, 3.2, 2), stringsAsFactors = FALSE)
total_years <- sum(info$years[match(cycles, info$cycle)])

file_of <- function(cycle, stem) {
  letter <- info$letter[info$cycle == cycle]
  wanted <- if (letter == "P") paste0("P_", stem) else paste0(stem, "_", letter)
  files <- list.files(folder)
  hit <- files[toupper(files) == toupper(paste0(wanted, ".xpt"))]
  if (length(hit) != 1) stop("no single file for ", wanted)
  data <- read.xport(file.path(folder, hit))
  for (v in names(data)) {
    x <- data[[v]]
    if (is.numeric(x)) { x[!is.na(x) & abs(x) < 1e-70] <- 0; data[[v]] <- x }
  }
  data
}
weight_name <- function(cycle) {
  pre <- cycle == "2017-2020"
  switch(level,
         interview = if (pre) "WTINTPRP" else "WTINT2YR",
         exam = if (pre) "WTMECPRP" else "WTMEC2YR",
         day1 = if (pre) "WTDRD1PP" else "WTDRD1")
}
yes_no <- function(x) ifelse(is.na(x), NA, ifelse(x == 1, 1, ifelse(x == 2, 0, NA)))

rows <- map[map$kind == "row", ]
sums <- map[map$kind == "sum", ]
diet_max <- as.numeric(map$value[map$kind == "diet"])
groups <- unique(c(rbind(rows$group, rows$diet_group)))
groups <- groups[!is.na(groups) & groups != "" & groups != "none"]
place <- function(code, density) {
  best <- ""
  for (p in rows$prefix) if (startsWith(code, p) && nchar(p) > nchar(best)) best <- p
  if (best == "") return(NA)
  r <- rows[rows$prefix == best, ]
  if (r$diet_group != "" && density <= diet_max) return(r$diet_group)
  if (r$group == "none") NA else r$group
}

one_cycle <- function(cycle) {
  demo <- file_of(cycle, "DEMO")
  seqn <- demo$SEQN
  out <- data.frame(person_id = seqn, source = "nhanes", cycle = cycle,
                    age_years = pmin(demo$RIDAGEYR, 80),
                    sex = c("male", "female")[demo$RIAGENDR],
                    race_ethnicity = c("mexican_american", "other_hispanic", "white", "black",
                                       "other")[demo$RIDRETH1],
                    stringsAsFactors = FALSE)
  if (level != "interview") {
    bmx <- file_of(cycle, "BMX")
    out$bmi <- bmx$BMXBMI[match(seqn, bmx$SEQN)]
  }
  diq_file <- file_of(cycle, "DIQ")
  diq <- diq_file$DIQ010[match(seqn, diq_file$SEQN)]
  out$diabetes <- ifelse(!is.na(diq) & diq == 3, 0, yes_no(diq))
  kiq <- file_of(cycle, "KIQ_U")
  at <- match(seqn, kiq$SEQN)
  k26 <- kiq$KIQ026[at]
  never <- !is.na(k26) & k26 == 2
  out$stone_ever <- yes_no(k26)
  out$stone_past_year <- NA_real_
  out$stone_passed_count <- NA_real_
  if ("KIQ029" %in% names(kiq)) {
    k29 <- kiq$KIQ029[at]
    v <- yes_no(k29); v[never & is.na(k29)] <- 0
    out$stone_past_year <- v
  }
  if ("KID028" %in% names(kiq)) {
    k28 <- kiq$KID028[at]
    v <- k28; v[!is.na(k28) & k28 %in% c(777, 999)] <- NA; v[never & is.na(k28)] <- 0
    out$stone_passed_count <- v
  }
  weight <- demo[[weight_name(cycle)]]
  if (level == "day1") {
    tot <- file_of(cycle, "DR1TOT")
    t <- match(seqn, tot$SEQN)
    ok <- !is.na(tot$DR1DRSTZ[t]) & tot$DR1DRSTZ[t] == 1
    water_g <- ifelse(ok, tot$DR1_320Z[t], NA)
    moist_g <- ifelse(ok, tot$DR1TMOIS[t], NA)
    out$water_l_day <- water_g / 1000
    out$tap_water_l_day <- ifelse(ok, tot$DR1_330Z[t], NA) / 1000
    out$bottled_water_l_day <- ifelse(ok, tot$DR1BWATZ[t], NA) / 1000
    out$moisture_l_day <- moist_g / 1000
    drank <- ok & water_g > 0
    below <- sum(drank & (moist_g + 1 < water_g))
    includes <- sum(drank) == 0 || below <= 0.01 * sum(drank)
    out$total_fluid_l_day <- if (includes) moist_g / 1000 else (moist_g + water_g) / 1000
    iff <- file_of(cycle, "DR1IFF")
    grams <- ifelse(is.na(iff$DR1IGRMS), 0, iff$DR1IGRMS)
    density <- ifelse(grams > 0, iff$DR1IKCAL / grams * 100, Inf)
    density[is.na(density)] <- Inf
    group <- mapply(place, sprintf("%.0f", iff$DR1IFDCD), density)
    for (g in groups) {
      total <- tapply(grams[!is.na(group) & group == g], iff$SEQN[!is.na(group) & group == g],
                      sum)
      v <- as.numeric(total[match(as.character(seqn), names(total))])
      v[is.na(v)] <- 0
      v[!ok] <- NA
      out[[paste0(g, "_ml_day")]] <- v
    }
    for (i in seq_len(nrow(sums))) {
      parts <- strsplit(sums$value[i], "+", fixed = TRUE)[[1]]
      out[[paste0(sums$group[i], "_ml_day")]] <- Reduce(`+`, lapply(
        parts, function(p) out[[paste0(p, "_ml_day")]]))
    }
    weight <- tot[[weight_name(cycle)]][t]
  }
  weight[is.na(weight)] <- 0
  years <- info$years[info$cycle == cycle]
  out$weight <- weight * years / total_years
  out$strata <- paste0(cycle, ":", demo$SDMVSTRA)
  out$psu <- demo$SDMVPSU
  out
}

merged <- do.call(rbind, lapply(cycles, one_cycle))
for (v in names(merged)) {
  if (is.numeric(merged[[v]])) {
    merged[[v]] <- ifelse(is.na(merged[[v]]), "", sprintf("%.17g", merged[[v]]))
  }
}
write.csv(merged, output, row.names = FALSE, na = "")
cat(R.version.string, "\n")
