# Second reference for the discriminant families: R's MASS package (Venables
# & Ripley, Modern Applied Statistics with S), whose lda divides the pooled
# covariance by n - K and whose qda divides each class covariance by n_k - 1:
# baserate's default divisors. Writes posteriors at full precision.
# Usage: Rscript mass.R [DIR]   (DIR holds data/ and expected/; default: here)
suppressMessages(library(MASS))
args <- commandArgs(trailingOnly = TRUE)
dir <- if (length(args) > 0) args[1] else "."
write_posteriors <- function(p, name) {
  out <- file.path(dir, "expected", paste0("mass_", name, ".csv"))
  write.csv(format(as.data.frame(p), digits = 17), out, row.names = FALSE, quote = FALSE)
}
for (name in c("iris", "wine", "breast_cancer")) {
  d <- read.csv(file.path(dir, "data", paste0(name, ".csv")))
  x <- as.matrix(d[, setdiff(names(d), "target")])
  y <- factor(d$target, levels = sort(unique(d$target)))
  k <- nlevels(y)
  prior <- c(rep(1, k - 1), 2) / (k + 1)
  write_posteriors(predict(lda(x, y, tol = 1e-10), x)$posterior, paste0(name, "_lda"))
  write_posteriors(predict(lda(x, y, prior = prior, tol = 1e-10), x)$posterior, paste0(name, "_lda_prior"))
  if (name != "breast_cancer") {
    write_posteriors(predict(qda(x, y), x)$posterior, paste0(name, "_qda"))
  }
}
cat("MASS", as.character(packageVersion("MASS")), "fixtures written\n")
