# Brute-force fragility by plain least-squares refits in R (Debian's
# r-base-core), as an outside oracle for engine.Fragility. For each case,
# every set of 1, then 2, then 3 removed rows is refitted (lm.fit) in
# lexicographic order; the first set that breaks a conclusion is written
# with the values before and after. Conclusions are checked in the order
# signs, significance (two-sided t test), bands, checkpoints.
# Run from this folder: Rscript gen_brute.R > brute.csv
delivery <- data.frame(
  time = c(16.68, 11.50, 12.03, 14.88, 13.75, 18.11, 8.00, 17.83, 79.24, 21.50,
           40.33, 21.00, 13.50, 19.75, 24.00, 29.00, 15.35, 19.00, 9.50, 35.10,
           17.90, 52.32, 18.75, 19.83, 10.75),
  cases = c(7, 3, 3, 4, 6, 7, 2, 7, 30, 5, 16, 10, 4, 6, 9, 10, 6, 7, 3, 17,
            10, 26, 9, 8, 4),
  distance = c(560, 220, 340, 80, 150, 330, 110, 210, 1460, 605, 688, 215, 255, 462, 448,
               776, 200, 132, 36, 770, 140, 810, 450, 635, 150))
ols <- function(X, y) {
  f <- lm.fit(X, y)
  if (f$rank < ncol(X)) return(NULL)
  df <- nrow(X) - ncol(X)
  s2 <- sum(f$residuals^2) / df
  C <- chol2inv(qr.R(f$qr))
  piv <- f$qr$pivot
  b <- f$coefficients
  se <- sqrt(s2 * diag(C))[order(piv)]
  list(b = b, p = 2 * pt(-abs(b / se), df), se = se)
}
# checks: list of list(kind, j, half, x0, alpha)
value <- function(fit, ch) {
  if (ch$kind == "significance") return(fit$p[ch$j])
  if (ch$kind == "checkpoint") return(sum(ch$x0 * fit$b))
  fit$b[ch$j]
}
broken <- function(full, fit, ch) {
  if (ch$kind == "sign") return(sign(fit$b[ch$j]) != sign(full$b[ch$j]))
  if (ch$kind == "significance") return((fit$p[ch$j] < ch$alpha) != (full$p[ch$j] < ch$alpha))
  abs(value(fit, ch) - value(full, ch)) > ch$half
}
brute <- function(name, X, y, checks, maxm = 3) {
  full <- ols(X, y)
  n <- nrow(X)
  for (m in 1:maxm) {
    sets <- combn(n, m)
    for (k in seq_len(ncol(sets))) {
      s <- sets[, k]
      fit <- ols(X[-s, , drop = FALSE], y[-s])
      if (is.null(fit)) next
      for (ch in checks) {
        if (broken(full, fit, ch)) {
          return(sprintf("%s,%d,%s,%s,%s,%.17g,%.17g", name, m, paste(s, collapse = " "),
                         ch$kind, ch$term, value(full, ch), value(fit, ch)))
        }
      }
    }
  }
  sprintf("%s,0,,,,,", name)
}
default_checks <- function(X, alpha = 0.05) {
  out <- list()
  for (j in 2:ncol(X)) out[[length(out) + 1]] <- list(kind = "sign", j = j, term = colnames(X)[j])
  for (j in 2:ncol(X)) out[[length(out) + 1]] <- list(kind = "significance", j = j, term = colnames(X)[j], alpha = alpha)
  out
}
band <- function(X, y, term, K) {
  j <- match(term, colnames(X))
  list(kind = "band", j = j, term = term, half = K * ols(X, y)$se[j])
}
Xd <- cbind(intercept = 1, cases = delivery$cases, distance = delivery$distance)
yd <- delivery$time
cars <- read.csv("cars.csv", comment.char = "#")
Xc <- cbind(intercept = 1, speed = cars$speed)
women <- read.csv("women.csv", comment.char = "#")
Xw <- cbind(intercept = 1, height = women$height, "height^2" = women$height^2)
cat("# engine.Fragility oracle: plain refits in", R.version.string, "(gen_brute.R)\n")
cat("case,index,rows,kind,term,before,after\n")
cat(brute("delivery/defaults", Xd, yd, default_checks(Xd)), "\n", sep = "")
cat(brute("delivery/bands", Xd, yd, list(band(Xd, yd, "cases", 1), band(Xd, yd, "distance", 2))), "\n", sep = "")
cat(brute("delivery/checkpoint", Xd, yd, list(list(kind = "checkpoint", term = "", x0 = c(1, 10, 500), half = 0.6))), "\n", sep = "")
cat(brute("cars/defaults", Xc, cars$dist, default_checks(Xc)), "\n", sep = "")
cat(brute("cars/band", Xc, cars$dist, list(band(Xc, cars$dist, "speed", 0.4))), "\n", sep = "")
cat(brute("cars/checkpoint", Xc, cars$dist, list(list(kind = "checkpoint", term = "", x0 = c(1, 25), half = 4))), "\n", sep = "")
cat(brute("women/defaults", Xw, women$weight, default_checks(Xw)), "\n", sep = "")
cat(brute("women/band", Xw, women$weight, list(band(Xw, women$weight, "height^2", 0.7))), "\n", sep = "")
