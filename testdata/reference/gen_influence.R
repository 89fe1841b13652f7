# gen_influence.R writes the reference values that engine/rgolden_test.go
# checks plumb's fit and influence measures against.
#
# Oracle: R (Debian's r-base-core), functions lm (with weights = for the
# weighted cases, factors with treatment contrasts for the group cases),
# summary.lm, confint, residuals, hatvalues, rstandard, rstudent,
# cooks.distance, dffits, dfbetas, covratio and anova from the stats
# package, and dwtest and bptest from Debian's r-cran-lmtest (the model-form
# checks under "form"), on published data sets shipped in R's datasets package and
# on three small data sets of our own, generated here with set.seed in an
# invented scenario (a calibration bench at the fictitious "Ketterby
# instrument workshop").
#
# Run from the repository root:   Rscript testdata/reference/gen_influence.R
# (testdata/reference/regen.sh does that and checks nothing but the R
# version line changed). One JSON file per data set, numbers with 17
# significant digits, NaN/Inf written as null.

out_dir <- "testdata/reference"
args <- commandArgs(trailingOnly = TRUE)
if (length(args) >= 1) out_dir <- args[1]

jstr <- function(s) {
  s <- gsub("\\\\", "\\\\\\\\", s)
  s <- gsub("\"", "\\\\\"", s)
  paste0("\"", s, "\"")
}
jnum <- function(x) {
  ifelse(is.finite(x), sprintf("%.17g", x), "null")
}
jarr <- function(x) paste0("[", paste(jnum(as.numeric(x)), collapse = ", "), "]")
# jdata writes measured values with the fewest of 15 or 17 digits that
# read back as the same double, so the data stay legible.
jdata <- function(x) {
  x <- as.numeric(x)
  short <- sprintf("%.15g", x)
  v <- ifelse(as.numeric(short) == x, short, sprintf("%.17g", x))
  paste0("[", paste(v, collapse = ", "), "]")
}
jsarr <- function(x) paste0("[", paste(vapply(x, jstr, ""), collapse = ", "), "]")

# write_case fits formula on data and writes <name>.json.
#   terms:      the same model in plumb's term notation
#   response:   the data column holding the response
#   transform:  "" or "log" (the response in R's formula is log(response))
#   weights:    NULL, or the row weights R fits with (lm(weights = ))
#   weighting:  the same weights in plumb's weighting notation
#   coef_names: plumb's coefficient names when they are not the terms
#               (group terms expand to one name per coded level)
#   num_cols, text_cols: the data columns written as numbers and as text
#               (by default the formula's variables, all numeric)
write_case <- function(name, source, data, formula, response, terms,
                       intercept = TRUE, transform = "", labels = rownames(data),
                       weights = NULL, weighting = "", coef_names = NULL,
                       num_cols = NULL, text_cols = character()) {
  fit <- do.call("lm", list(formula = formula, data = data, weights = weights))
  s <- summary(fit)
  X <- model.matrix(fit)
  n <- nrow(X); p <- ncol(X)
  h <- hatvalues(fit)
  rs <- rstandard(fit)
  rt <- rstudent(fit)
  cd <- cooks.distance(fit)
  dff <- dffits(fit)
  dfb <- dfbetas(fit)
  cvr <- covratio(fit)
  # Unadjusted two-sided p of each externally studentized residual on
  # n-p-1 degrees of freedom, and its Bonferroni adjustment min(1, n p).
  op <- 2 * pt(abs(rt), df = n - p - 1, lower.tail = FALSE)
  bp <- pmin(1, n * op)
  cf <- coef(s)
  ci <- confint(fit, level = 0.95)
  if (is.null(coef_names)) coef_names <- c(if (intercept) "intercept", terms)
  stopifnot(length(coef_names) == p)
  wv <- if (is.null(weights)) rep(1, n) else weights

  # VIF_j = 1/(1 - R_j^2), the diagonal of the inverse correlation matrix
  # of the non-intercept columns (defined only with an intercept and at
  # least two other terms).
  vif <- NULL
  # (Weighted: the correlation matrix weighted by the row weights.)
  if (intercept && p >= 3) {
    vif <- diag(solve(cov.wt(X[, -1, drop = FALSE], wt = wv, cor = TRUE)$cor))
    names(vif) <- coef_names[-1]
  }

  cols <- if (is.null(num_cols)) unique(c(response, all.vars(formula)[-1])) else num_cols
  L <- character()
  add <- function(...) L <<- c(L, paste0(...))
  add("{")
  add("  \"source\": ", jstr(source), ",")
  add("  \"oracle\": ", jstr("R stats: lm, summary.lm, confint, residuals, hatvalues, rstandard, rstudent, cooks.distance, dffits, dfbetas, covratio"), ",")
  add("  \"r_version\": ", jstr(R.version.string), ",")
  add("  \"dataset\": ", jstr(name), ",")
  add("  \"formula\": ", jstr(paste(deparse(formula, width.cutoff = 500L), collapse = " ")), ",")
  add("  \"response\": ", jstr(response), ",")
  add("  \"response_transform\": ", jstr(transform), ",")
  add("  \"terms\": ", jsarr(terms), ",")
  add("  \"intercept\": ", if (intercept) "true" else "false", ",")
  add("  \"n\": ", n, ",")
  add("  \"p\": ", p, ",")
  add("  \"labels\": ", jsarr(as.character(labels)), ",")
  add("  \"data\": {")
  for (i in seq_along(cols)) {
    add("    ", jstr(cols[i]), ": ", jdata(data[[cols[i]]]), if (i < length(cols)) "," else "")
  }
  add("  },")
  if (length(text_cols) > 0) {
    add("  \"text_data\": {")
    for (i in seq_along(text_cols)) {
      add("    ", jstr(text_cols[i]), ": ", jsarr(as.character(data[[text_cols[i]]])),
          if (i < length(text_cols)) "," else "")
    }
    add("  },")
  }
  if (!is.null(weights)) {
    add("  \"weighting\": ", jstr(weighting), ",")
    add("  \"weights\": ", jarr(weights), ",")
  }
  add("  \"coefficient_names\": ", jsarr(coef_names), ",")
  add("  \"coefficients\": [")
  for (j in seq_len(p)) {
    add("    {\"term\": ", jstr(coef_names[j]),
        ", \"estimate\": ", jnum(cf[j, 1]), ", \"std_error\": ", jnum(cf[j, 2]),
        ", \"t\": ", jnum(cf[j, 3]), ", \"p\": ", jnum(cf[j, 4]),
        ", \"lower_95\": ", jnum(ci[j, 1]), ", \"upper_95\": ", jnum(ci[j, 2]), "}",
        if (j < p) "," else "")
  }
  add("  ],")
  add("  \"sigma\": ", jnum(s$sigma), ",")
  add("  \"df\": ", fit$df.residual, ",")
  add("  \"r_squared\": ", jnum(s$r.squared), ",")
  add("  \"adj_r_squared\": ", jnum(s$adj.r.squared), ",")
  if (!is.null(s$fstatistic)) {
    fs <- s$fstatistic
    add("  \"f_statistic\": ", jnum(fs[1]), ",")
    add("  \"f_p\": ", jnum(pf(fs[1], fs[2], fs[3], lower.tail = FALSE)), ",")
  }
  if (!is.null(vif)) {
    add("  \"vif\": {", paste(paste0(vapply(names(vif), jstr, ""), ": ", jnum(vif)), collapse = ", "), "},")
  }
  add("  \"residuals\": ", jarr(residuals(fit)), ",")
  add("  \"hat\": ", jarr(h), ",")
  add("  \"rstandard\": ", jarr(rs), ",")
  add("  \"rstudent\": ", jarr(rt), ",")
  add("  \"cooks_distance\": ", jarr(cd), ",")
  add("  \"dffits\": ", jarr(dff), ",")
  add("  \"dfbetas\": [")
  for (i in seq_len(n)) add("    ", jarr(dfb[i, ]), if (i < n) "," else "")
  add("  ],")
  add("  \"covratio\": ", jarr(cvr), ",")
  add("  \"outlier_p\": ", jarr(op), ",")
  add("  \"outlier_p_bonferroni\": ", jarr(bp), ",")
  add("  \"form\": ", form_checks(fit, X, wv, intercept))
  add("}")
  path <- file.path(out_dir, paste0(name, ".json"))
  writeLines(L, path)
  cat("wrote", path, "\n")
}

# form_checks computes the model-form checks of a fit (weighted versions
# on the rows sqrt(w) [x y] when the fit is weighted):
#   lack of fit: anova(fit, lm(y ~ factor(setting), weights = w)), the
#     settings being the distinct design rows; null without replicates or
#     with no more settings than coefficients;
#   Durbin-Watson: lmtest::dwtest on the scaled rows, in row order, p for
#     positive autocorrelation, exactly (Pan's algorithm, exact = TRUE)
#     and by the normal approximation with the exact moments (exact = FALSE);
#   studentized Breusch-Pagan (Koenker): lmtest::bptest on the scaled rows,
#     the variance regressed on the model's own (scaled) columns;
#   PRESS = sum w (e/(1-h))^2 and predicted R^2 = 1 - PRESS/TSS.
form_checks <- function(fit, X, wv, intercept) {
  n <- nrow(X); p <- ncol(X)
  yv <- model.response(model.frame(fit))
  sw <- sqrt(wv)
  Xs <- unname(X * sw)
  ys <- unname(yv * sw)
  setting <- factor(apply(X, 1, function(r) paste(sprintf("%.17g", r), collapse = ",")))
  g <- nlevels(setting)
  lof <- "null"
  if (g > p && n > g) {
    reduced <- lm(yv ~ 0 + X, weights = wv)
    full <- lm(yv ~ setting, weights = wv)
    a <- anova(reduced, full)
    lof <- paste0("{\"groups\": ", g, ", \"pure_error_df\": ", a$Res.Df[2],
                  ", \"lack_of_fit_df\": ", a$Df[2], ", \"f\": ", jnum(a$F[2]),
                  ", \"p\": ", jnum(a[2, "Pr(>F)"]), "}")
  }
  dwe <- dwtest(ys ~ 0 + Xs, exact = TRUE)
  dwa <- dwtest(ys ~ 0 + Xs, exact = FALSE)
  bp <- bptest(ys ~ 0 + Xs, studentize = TRUE)
  h <- hatvalues(fit)
  press <- sum(wv * (residuals(fit) / (1 - h))^2)
  tss <- if (intercept) sum(wv * (yv - weighted.mean(yv, wv))^2) else sum(wv * yv^2)
  paste0("{\"lack_of_fit\": ", lof,
         ", \"durbin_watson\": {\"statistic\": ", jnum(dwe$statistic),
         ", \"p_exact\": ", jnum(dwe$p.value), ", \"p_normal\": ", jnum(dwa$p.value), "}",
         ", \"breusch_pagan\": {\"statistic\": ", jnum(bp$statistic),
         ", \"df\": ", bp$parameter, ", \"p\": ", jnum(bp$p.value), "}",
         ", \"press\": ", jnum(press), ", \"predicted_r_squared\": ", jnum(1 - press / tss), "}")
}

suppressPackageStartupMessages(library(lmtest))

# Published data sets from R's datasets package.

write_case("LifeCycleSavings",
  "R datasets::LifeCycleSavings; Belsley, Kuh & Welsch (1980), Regression Diagnostics, Wiley",
  LifeCycleSavings, sr ~ pop15 + pop75 + dpi + ddpi,
  "sr", c("pop15", "pop75", "dpi", "ddpi"))

write_case("cars",
  "R datasets::cars; Ezekiel (1930), Methods of Correlation Analysis, Wiley",
  cars, dist ~ speed, "dist", c("speed"))

write_case("cars_quadratic_no_intercept",
  "R datasets::cars; Ezekiel (1930); quadratic through the origin",
  cars, dist ~ 0 + speed + I(speed^2), "dist", c("speed", "speed^2"),
  intercept = FALSE)

write_case("stackloss",
  "R datasets::stackloss; Brownlee (1960), Statistical Theory and Methodology in Science and Engineering, Wiley",
  stackloss, stack.loss ~ Air.Flow + Water.Temp + Acid.Conc.,
  "stack.loss", c("Air.Flow", "Water.Temp", "Acid.Conc."))

write_case("swiss",
  "R datasets::swiss; Mosteller & Tukey (1977), Data Analysis and Regression, Addison-Wesley",
  swiss, Fertility ~ Agriculture + Examination + Education + Catholic + Infant.Mortality,
  "Fertility", c("Agriculture", "Examination", "Education", "Catholic", "Infant.Mortality"))

write_case("women_quadratic",
  "R datasets::women; The World Almanac and Book of Facts (1975)",
  women, weight ~ height + I(height^2), "weight", c("height", "height^2"))

write_case("pressure_log_cubic",
  "R datasets::pressure; Weast (1973), Handbook of Chemistry and Physics, CRC Press",
  pressure, log(pressure) ~ temperature + I(temperature^2) + I(temperature^3),
  "pressure", c("temperature", "temperature^2", "temperature^3"), transform = "log")

write_case("trees_log",
  "R datasets::trees (the data set R ships, documented in ?trees)",
  trees, log(Volume) ~ log(Girth) + log(Height),
  "Volume", c("log(Girth)", "log(Height)"), transform = "log")

# Data sets of our own (invented scenario: the Ketterby instrument workshop).

# 1. Thermocouple calibration: bath temperature against EMF, quadratic, with
# one mis-keyed reading (row 17) and one standard far out of range (row 30).
set.seed(20261201)
emf <- round(seq(2, 46, length.out = 29) + runif(29, -0.4, 0.4), 3)
emf <- c(emf, 61.5)
temp <- round(1.2 + 24.1 * emf - 0.071 * emf^2 + rnorm(30, sd = 0.9), 2)
temp[17] <- temp[17] + 9.5
thermo <- data.frame(emf_mv = emf, temp_c = temp)
write_case("ketterby_thermocouple",
  "invented: Ketterby instrument workshop, thermocouple bath calibration (set.seed(20261201))",
  thermo, temp_c ~ emf_mv + I(emf_mv^2), "temp_c", c("emf_mv", "emf_mv^2"),
  labels = sprintf("bath-%02d", 1:30))

# 2. Flow meter: flow from pressure drop and fluid temperature with an
# interaction; column names with spaces and brackets (quoted in plumb's terms).
set.seed(7331)
dp <- round(runif(40, 5, 80), 2)
tf <- round(runif(40, 12, 38), 1)
dp[40] <- 140
flow <- round(0.8 + 0.42 * dp - 0.05 * tf + 0.0031 * dp * tf + rnorm(40, sd = 0.6), 3)
flow[11] <- flow[11] - 4
flowdat <- data.frame(`flow rate (l/min)` = flow, `pressure drop (kPa)` = dp,
                      `fluid temp` = tf, check.names = FALSE)
write_case("ketterby_flowmeter",
  "invented: Ketterby instrument workshop, differential-pressure flow meter (set.seed(7331))",
  flowdat, `flow rate (l/min)` ~ `pressure drop (kPa)` * `fluid temp`,
  "flow rate (l/min)",
  c("\"pressure drop (kPa)\"", "\"fluid temp\"", "\"pressure drop (kPa)\"*\"fluid temp\""),
  labels = sprintf("run-%02d", 1:40))

# 3. Balance drift: deviation of the indicated mass of a 200 g check weight
# from its nominal value, in mg, against days since service and room
# humidity through log(humidity), 25 daily readings. (Deviations rather than
# the indicated mass itself, which would carry 200 g of cancellation into
# every residual and leave R's own values with fewer correct digits than
# the comparison asks for.)
set.seed(99)
day <- 1:25
rh <- round(runif(25, 30, 65), 1)
dev <- round(0.3 + 0.04 * day + 0.9 * log(rh) + rnorm(25, sd = 0.12), 3)
dev[9] <- dev[9] + 0.7
balance <- data.frame(day = day, rh_pct = rh, dev_mg = dev)
write_case("ketterby_balance",
  "invented: Ketterby instrument workshop, balance check-weight drift (set.seed(99))",
  balance, dev_mg ~ day + log(rh_pct), "dev_mg", c("day", "log(rh_pct)"),
  labels = sprintf("day-%02d", 1:25))

# Forward predictions with intervals, for engine/predict_rgolden_test.go.
# Oracle: R stats predict.lm(se.fit = TRUE, interval = "confidence" and
# "prediction", level = ...); the prediction interval for the mean of m new
# readings uses pred.var = sigma^2 / m. One file per case in
# <out_dir>/predict/, each with the data, the model in plumb's terms and
# the points (new predictor values chosen here: inside the data, at a data
# point and beyond the data).
write_predictions <- function(name, source, data, formula, response, terms,
                              newdata, intercept = TRUE, transform = "",
                              levels = c(0.95, 0.99), readings = c(1, 4)) {
  fit <- lm(formula, data = data)
  sigma <- summary(fit)$sigma
  cols <- unique(c(response, all.vars(formula)[-1]))
  pcols <- setdiff(cols, response)
  L <- character()
  add <- function(...) L <<- c(L, paste0(...))
  add("{")
  add("  \"source\": ", jstr(source), ",")
  add("  \"oracle\": ", jstr("R stats: lm, predict.lm(se.fit = TRUE, interval = \"confidence\" / \"prediction\", level, pred.var = sigma^2/m)"), ",")
  add("  \"r_version\": ", jstr(R.version.string), ",")
  add("  \"dataset\": ", jstr(name), ",")
  add("  \"formula\": ", jstr(paste(deparse(formula, width.cutoff = 500L), collapse = " ")), ",")
  add("  \"response\": ", jstr(response), ",")
  add("  \"response_transform\": ", jstr(transform), ",")
  add("  \"terms\": ", jsarr(terms), ",")
  add("  \"intercept\": ", if (intercept) "true" else "false", ",")
  add("  \"data\": {")
  for (i in seq_along(cols)) {
    add("    ", jstr(cols[i]), ": ", jdata(data[[cols[i]]]), if (i < length(cols)) "," else "")
  }
  add("  },")
  add("  \"points\": [")
  rows <- character()
  for (i in seq_len(nrow(newdata))) {
    nd <- newdata[i, , drop = FALSE]
    at <- paste(vapply(pcols, function(cn) paste0(jstr(cn), ": ", sub("^\\[(.*)\\]$", "\\1", jdata(nd[[cn]]))), ""), collapse = ", ")
    for (lev in levels) {
      for (m in readings) {
        cf <- predict(fit, nd, se.fit = TRUE, interval = "confidence", level = lev)
        pr <- predict(fit, nd, se.fit = TRUE, interval = "prediction", level = lev,
                      pred.var = sigma^2 / m)
        rows <- c(rows, paste0("    {\"at\": {", at, "}, \"level\": ", lev, ", \"readings\": ", m,
          ", \"fit\": ", jnum(cf$fit[1, "fit"]), ", \"se_fit\": ", jnum(cf$se.fit[1]),
          ", \"df\": ", cf$df, ", \"residual_scale\": ", jnum(cf$residual.scale),
          ", \"confidence\": [", jnum(cf$fit[1, "lwr"]), ", ", jnum(cf$fit[1, "upr"]), "]",
          ", \"prediction\": [", jnum(pr$fit[1, "lwr"]), ", ", jnum(pr$fit[1, "upr"]), "]}"))
      }
    }
  }
  add(paste(rows, collapse = ",\n"))
  add("  ]")
  add("}")
  dir.create(file.path(out_dir, "predict"), showWarnings = FALSE)
  path <- file.path(out_dir, "predict", paste0(name, ".json"))
  writeLines(L, path)
  cat("wrote", path, "\n")
}

write_predictions("cars",
  "R datasets::cars; Ezekiel (1930), Methods of Correlation Analysis, Wiley",
  cars, dist ~ speed, "dist", c("speed"),
  data.frame(speed = c(4, 12.5, 15, 25, 32)))

write_predictions("cars_quadratic_no_intercept",
  "R datasets::cars; Ezekiel (1930); quadratic through the origin",
  cars, dist ~ 0 + speed + I(speed^2), "dist", c("speed", "speed^2"),
  data.frame(speed = c(2, 10.5, 25, 30)), intercept = FALSE)

write_predictions("women_quadratic",
  "R datasets::women; The World Almanac and Book of Facts (1975)",
  women, weight ~ height + I(height^2), "weight", c("height", "height^2"),
  data.frame(height = c(58, 64.5, 72, 76)))

write_predictions("pressure_log_cubic",
  "R datasets::pressure; Weast (1973), Handbook of Chemistry and Physics, CRC Press",
  pressure, log(pressure) ~ temperature + I(temperature^2) + I(temperature^3),
  "pressure", c("temperature", "temperature^2", "temperature^3"),
  data.frame(temperature = c(0, 125, 250, 333, 380)), transform = "log")

write_predictions("trees_log",
  "R datasets::trees (the data set R ships, documented in ?trees)",
  trees, log(Volume) ~ log(Girth) + log(Height),
  "Volume", c("log(Girth)", "log(Height)"),
  data.frame(Girth = c(8.3, 13, 21), Height = c(70, 76, 90)), transform = "log")

write_predictions("stackloss",
  "R datasets::stackloss; Brownlee (1960), Statistical Theory and Methodology in Science and Engineering, Wiley",
  stackloss, stack.loss ~ Air.Flow + Water.Temp + Acid.Conc.,
  "stack.loss", c("Air.Flow", "Water.Temp", "Acid.Conc."),
  data.frame(Air.Flow = c(50, 62, 80), Water.Temp = c(18, 21, 27), Acid.Conc. = c(72, 87, 93)))

write_predictions("ketterby_thermocouple",
  "invented: Ketterby instrument workshop, thermocouple bath calibration (set.seed(20261201))",
  thermo, temp_c ~ emf_mv + I(emf_mv^2), "temp_c", c("emf_mv", "emf_mv^2"),
  data.frame(emf_mv = c(0, 2.5, 25, 46, 61.5, 70)))

write_predictions("ketterby_flowmeter",
  "invented: Ketterby instrument workshop, differential-pressure flow meter (set.seed(7331))",
  flowdat, `flow rate (l/min)` ~ `pressure drop (kPa)` * `fluid temp`,
  "flow rate (l/min)",
  c("\"pressure drop (kPa)\"", "\"fluid temp\"", "\"pressure drop (kPa)\"*\"fluid temp\""),
  data.frame(`pressure drop (kPa)` = c(5, 40, 140, 160), `fluid temp` = c(12, 25, 38, 20),
             check.names = FALSE))

write_predictions("ketterby_balance",
  "invented: Ketterby instrument workshop, balance check-weight drift (set.seed(99))",
  balance, dev_mg ~ day + log(rh_pct), "dev_mg", c("day", "log(rh_pct)"),
  data.frame(day = c(1, 13, 30), rh_pct = c(30, 47.5, 70)))

# Weighted and grouped cases.

# byte_factor makes a factor whose levels are in byte order (plumb's
# reference level is the first in byte order).
byte_factor <- function(x) {
  x <- as.character(x)
  factor(x, levels = sort(unique(x), method = "radix"))
}

# 4. cars weighted by 1/speed (variance growing with speed).
write_case("cars_weighted_inverse_speed",
  "R datasets::cars; Ezekiel (1930); weighted by 1/speed",
  cars, dist ~ speed, "dist", c("speed"),
  weights = 1 / cars$speed, weighting = "inverse(speed)")

# 5. Invented: Ketterby workshop photometer calibration, five replicates at
# eight standards, standard deviation proportional to concentration,
# weighted by 1/conc^2 (replicates give the lack-of-fit test its pure error).
set.seed(4242)
conc <- rep(c(0.5, 1, 2, 5, 10, 20, 50, 100), each = 5)
absb <- round(0.004 + 0.0213 * conc - 0.0000242 * conc^2 + rnorm(40, sd = 0.02 * 0.0213 * conc), 5)
absb[23] <- absb[23] * 1.12
photo <- data.frame(conc = conc, abs = absb)
write_case("ketterby_photometer_weighted",
  "invented: Ketterby instrument workshop, photometer calibration, weights 1/conc^2 (set.seed(4242))",
  photo, abs ~ conc, "abs", c("conc"),
  weights = 1 / photo$conc^2, weighting = "inverse(conc^2)",
  labels = sprintf("std-%02d", 1:40))

# 6. R datasets::CO2: uptake against ambient CO2 concentration with the
# treatment as a group: separate intercepts and slopes per treatment.
co2 <- data.frame(uptake = CO2$uptake, conc = CO2$conc, treatment = as.character(CO2$Treatment))
co2$tf <- byte_factor(co2$treatment)
write_case("co2_group_slopes",
  "R datasets::CO2; Potvin, Lechowicz & Tardif (1990), Ecology 71:1389",
  co2, uptake ~ tf + conc + tf:conc, "uptake",
  c("group(treatment)", "conc", "group(treatment)*conc"),
  coef_names = c("intercept", "treatment=nonchilled", "conc", "treatment=nonchilled*conc"),
  num_cols = c("uptake", "conc"), text_cols = "treatment")

# 7. Invented: Ketterby workshop reagent stability study, assay (% of label)
# of three batches over 0-18 months; batch labels are text, the months*batch
# spelling, and a column of weights (1/variance of each assay, measured).
set.seed(1701)
months <- rep(c(0, 3, 6, 9, 12, 18), times = 3)
batch <- rep(c("K-207", "K-115", "K-309"), each = 6)
slope <- c(-0.21, -0.18, -0.26)[match(batch, c("K-207", "K-115", "K-309"))]
start <- c(100.4, 99.8, 100.9)[match(batch, c("K-207", "K-115", "K-309"))]
assay <- round(start + slope * months + rnorm(18, sd = 0.25), 2)
wvar <- round(1 / (0.04 + 0.002 * months + runif(18, 0, 0.02)), 3)
stab <- data.frame(assay = assay, months = months, batch = batch, w = wvar)
stab$bf <- byte_factor(stab$batch)
write_case("ketterby_stability_batches",
  "invented: Ketterby instrument workshop, reagent stability study, three batches, measured weights (set.seed(1701))",
  stab, assay ~ bf + months + months:bf, "assay",
  c("group(batch)", "months", "months*group(batch)"),
  coef_names = c("intercept", "batch=K-207", "batch=K-309", "months",
                 "months*batch=K-207", "months*batch=K-309"),
  weights = stab$w, weighting = "w",
  num_cols = c("assay", "months", "w"), text_cols = "batch",
  labels = sprintf("%s-m%02d", batch, months))

# Poolability of the stability batches (ICH Q1E: slopes, then intercepts),
# weighted as above: anova(common, separate) and anova(pooled, common).
pool_case <- function(name, source, data, wts) {
  sep <- lm(assay ~ bf + months + bf:months, data = data, weights = wts)
  com <- lm(assay ~ bf + months, data = data, weights = wts)
  poo <- lm(assay ~ months, data = data, weights = wts)
  a1 <- anova(com, sep)
  a2 <- anova(poo, com)
  L <- c("{",
    paste0("  \"source\": ", jstr(source), ","),
    paste0("  \"oracle\": ", jstr("R stats: lm(weights = ), anova"), ","),
    paste0("  \"r_version\": ", jstr(R.version.string), ","),
    paste0("  \"assay\": ", jdata(data$assay), ","),
    paste0("  \"months\": ", jdata(data$months), ","),
    paste0("  \"batch\": ", jsarr(data$batch), ","),
    paste0("  \"w\": ", jdata(data$w), ","),
    paste0("  \"slopes\": {\"f\": ", jnum(a1$F[2]), ", \"df1\": ", a1$Df[2], ", \"df2\": ", a1$Res.Df[2],
           ", \"p\": ", jnum(a1[2, "Pr(>F)"]), "},"),
    paste0("  \"intercepts\": {\"f\": ", jnum(a2$F[2]), ", \"df1\": ", a2$Df[2], ", \"df2\": ", a2$Res.Df[2],
           ", \"p\": ", jnum(a2[2, "Pr(>F)"]), "}"),
    "}")
  dir.create(file.path(out_dir, "pool"), showWarnings = FALSE)
  path <- file.path(out_dir, "pool", paste0(name, ".json"))
  writeLines(L, path)
  cat("wrote", path, "\n")
}
pool_case("ketterby_stability_batches",
  "invented: Ketterby instrument workshop, reagent stability study, three batches, measured weights (set.seed(1701))",
  stab, stab$w)
# The same batches with a common slope (the K-115 and K-309 slopes set to
# K-207's), so that the intercept test is reached.
stab2 <- stab
stab2$assay <- round(stab$assay - (slope + 0.21) * stab$months, 2)
pool_case("ketterby_stability_common_slope",
  "invented: Ketterby stability study with a common slope (derived from the above)",
  stab2, stab2$w)
# ... and one line for all: 100.4 - 0.21 months plus the residuals of the
# separate lines (which average zero within each batch).
stab3 <- stab
stab3$assay <- round(100.4 - 0.21 * stab$months +
  residuals(lm(assay ~ bf + months + bf:months, data = stab, weights = w)), 2)
pool_case("ketterby_stability_one_line",
  "invented: Ketterby stability study with one line for all batches (derived from the above)",
  stab3, stab3$w)

# 8. Invented: Ketterby workshop balance check over four numbered lots
# (numbers used as labels: byte order puts lot 10 before lot 2) without an
# intercept, so every lot gets its own level.
set.seed(515)
lot <- rep(c(2, 3, 10, 11), each = 7)
temp <- round(runif(28, 18, 26), 1)
drift <- round(c(0.12, -0.05, 0.31, 0.02)[match(lot, c(2, 3, 10, 11))] + 0.015 * temp + rnorm(28, sd = 0.03), 3)
lots <- data.frame(drift = drift, lot = lot, temp = temp)
lots$lf <- byte_factor(lots$lot)
write_case("ketterby_lots_no_intercept",
  "invented: Ketterby instrument workshop, balance drift over numbered lots (set.seed(515))",
  lots, drift ~ 0 + lf + temp, "drift", c("group(lot)", "temp"),
  intercept = FALSE,
  coef_names = c("lot=10", "lot=11", "lot=2", "lot=3", "temp"),
  num_cols = c("drift", "lot", "temp"),
  labels = sprintf("lot%d-%d", lot, rep(1:7, 4)))

# 9. NIST StRD Pontius (public domain): deflection of a load cell against
# load, 20 loads each measured twice, so the lack-of-fit test has pure
# error. These are, from memory, the data of the NIST/SEMATECH
# e-Handbook's load-cell calibration case study (section 4.6.1), which
# fits a quadratic after the straight line shows curvature; both fits are
# written (R's lack-of-fit test rejects the line, not the quadratic).
pontius <- data.frame(
  load = c(150000, 300000, 450000, 600000, 750000, 900000, 1050000, 1200000, 1350000, 1500000, 1650000, 1800000, 1950000, 2100000, 2250000, 2400000, 2550000, 2700000, 2850000, 3000000, 150000, 300000, 450000, 600000, 750000, 900000, 1050000, 1200000, 1350000, 1500000, 1650000, 1800000, 1950000, 2100000, 2250000, 2400000, 2550000, 2700000, 2850000, 3000000),
  deflection = c(0.11019, 0.21956, 0.32949, 0.43899, 0.54803, 0.65694, 0.76562, 0.87487, 0.98292, 1.09146, 1.20001, 1.30822, 1.41599, 1.52399, 1.63194, 1.73947, 1.84646, 1.95392, 2.06128, 2.16844, 0.11052, 0.22018, 0.32939, 0.43886, 0.54798, 0.65739, 0.76596, 0.87474, 0.983, 1.0915, 1.20004, 1.30818, 1.41613, 1.52408, 1.63159, 1.73965, 1.84696, 1.95445, 2.06177, 2.16829))
write_case("pontius_line",
  "NIST StRD Pontius (load cell calibration), straight line",
  pontius, deflection ~ load, "deflection", c("load"))
write_case("pontius_quadratic",
  "NIST StRD Pontius (load cell calibration), quadratic (the certified model)",
  pontius, deflection ~ load + I(load^2), "deflection", c("load", "load^2"))
