# Reference side of bench/fit-bench.ts: lme4 + lmerTest on the same CSV.
# Usage: Rscript --vanilla bench/fit-bench.R TASK CSV   (TASK: session | year | period12 | period52)
# Prints one JSON line {task, fits, fitMs, fitCpuMs}; they cover the fits and Satterthwaite tests only
# (lme4's default optimiser settings, as a user would run it).
suppressPackageStartupMessages({
  library(lme4)
  library(lmerTest)
})
args <- commandArgs(trailingOnly = TRUE)
task <- args[1]
d <- read.csv(args[2], colClasses = c(session = "character", date = "character", assessor = "character", product = "character",
                                      replicate = "integer", attribute = "character", value = "numeric"))
session_formula <- value ~ product + (1 | assessor) + (1 | assessor:product)
period_formula <- value ~ product + (1 | assessor) + (1 | session) + (1 | assessor:product) +
  (1 | assessor:session) + (1 | product:session)
fit_session <- function(g) {
  m <- lmerTest::lmer(session_formula, data = g)
  anova(m)
}
started <- proc.time()
start <- started[["elapsed"]]
fits <- 0
if (task == "session") {
  fit_session(d[d$session == "S01" & d$attribute == "attr01", ])
  fits <- 1
} else if (task == "year") {
  for (g in split(d, list(d$session, d$attribute), drop = TRUE)) {
    fit_session(g)
    fits <- fits + 1
  }
} else if (task %in% c("period12", "period52")) {
  sessions <- if (task == "period12") 12 else 52
  g <- d[d$attribute == "attr02" & as.integer(substring(d$session, 2)) <= sessions, ]
  m <- lmerTest::lmer(period_formula, data = g)
  anova(m)
  fits <- 1
} else {
  stop("unknown task")
}
finished <- proc.time()
fit_ms <- 1000 * (finished[["elapsed"]] - start)
fit_cpu_ms <- 1000 * ((finished[["user.self"]] + finished[["sys.self"]]) - (started[["user.self"]] + started[["sys.self"]]))
cat(sprintf('{"task":"%s","fits":%d,"fitMs":%.3f,"fitCpuMs":%.3f}\n', task, fits, fit_ms, fit_cpu_ms))
