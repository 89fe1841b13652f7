# gen_influence.R writes the reference values that engine/rgolden_test.go
# checks plumb's fit and influence measures against.
#
# Oracle: R (Debian's r-base-core), functions lm, summary.lm, confint,
# residuals, hatvalues, rstandard, rstudent, cooks.distance, dffits, dfbetas
# and covratio from the stats package, on published data sets shipped in R's datasets package and
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
write_case <- function(name, source, data, formula, response, terms,
                       intercept = TRUE, transform = "", labels = rownames(data)) {
  fit <- lm(formula, data = data)
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
  coef_names <- c(if (intercept) "intercept", terms)
  stopifnot(length(coef_names) == p)

  # VIF_j = 1/(1 - R_j^2), the diagonal of the inverse correlation matrix
  # of the non-intercept columns (defined only with an intercept and at
  # least two other terms).
  vif <- NULL
  if (intercept && p >= 3) {
    vif <- diag(solve(cor(X[, -1, drop = FALSE])))
  }

  cols <- unique(c(response, all.vars(formula)[-1]))
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
    add("  \"vif\": {", paste(paste0(vapply(terms, jstr, ""), ": ", jnum(vif)), collapse = ", "), "},")
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
  add("  \"outlier_p_bonferroni\": ", jarr(bp))
  add("}")
  path <- file.path(out_dir, paste0(name, ".json"))
  writeLines(L, path)
  cat("wrote", path, "\n")
}

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
  "R datasets::trees; Ryan, Joiner & Ryan (1976), Minitab Student Handbook, Duxbury",
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
  "R datasets::trees; Ryan, Joiner & Ryan (1976), Minitab Student Handbook, Duxbury",
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
