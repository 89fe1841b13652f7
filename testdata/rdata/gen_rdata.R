# gen_rdata.R writes data sets shipped with R (its datasets package) as the
# CSV files R's own writers make, and the fits R's lm gives on them, for
# the decoder's and the fit's checks on real files.
#
# Oracle: R (Debian's r-base-core): utils::write.csv, utils::write.csv2,
# stats::lm. Data: datasets::airquality (New York, May to September 1973;
# 153 days, NA where a reading is missing: Ozone 37, Solar.R 7, 42 rows
# with at least one); datasets::mtcars (Motor Trend, 1974; 32 cars, their
# names as row names).
#
# Run from the repository root:   Rscript testdata/rdata/gen_rdata.R

out_dir <- "testdata/rdata"
args <- commandArgs(trailingOnly = TRUE)
if (length(args) >= 1) out_dir <- args[1]

# write.csv: ',' and '.', NA as "NA", a header of quoted names.
write.csv(airquality, file.path(out_dir, "airquality.csv"), row.names = FALSE)
# write.csv2: ';' and the decimal comma, as a European spreadsheet saves.
write.csv2(airquality, file.path(out_dir, "airquality_csv2.csv"), row.names = FALSE)

fit <- lm(Ozone ~ Solar.R + Wind + Temp, data = airquality) # na.action = na.omit
cf <- coef(summary(fit))
jnum <- function(x) sprintf("%.17g", x)
lines <- c(
  "{",
  sprintf("  \"source\": \"R %s, lm(Ozone ~ Solar.R + Wind + Temp, data = airquality), rows with NA omitted\",",
          paste(R.version$major, R.version$minor, sep = ".")),
  sprintf("  \"n\": %d,", nobs(fit)),
  sprintf("  \"omitted\": %d,", length(fit$na.action)),
  sprintf("  \"terms\": [%s],", paste0("\"", rownames(cf), "\"", collapse = ", ")),
  sprintf("  \"estimate\": [%s],", paste(jnum(cf[, 1]), collapse = ", ")),
  sprintf("  \"std_error\": [%s],", paste(jnum(cf[, 2]), collapse = ", ")),
  sprintf("  \"sigma\": %s,", jnum(summary(fit)$sigma)),
  sprintf("  \"r_squared\": %s,", jnum(summary(fit)$r.squared)),
  sprintf("  \"rows\": [%s],", paste(names(fitted(fit)), collapse = ", ")),
  sprintf("  \"fitted\": [%s]", paste(jnum(fitted(fit)), collapse = ", ")),
  "}"
)
writeLines(lines, file.path(out_dir, "airquality_lm.json"))

# mtcars with its row names (the car) as a first column named "model", as
# write.csv writes a data frame; the fit's rows are named by the car.
cars <- data.frame(model = rownames(mtcars), mtcars, row.names = NULL)
write.csv(cars, file.path(out_dir, "mtcars.csv"), row.names = FALSE)
fit <- lm(mpg ~ wt + hp, data = mtcars)
cf <- coef(summary(fit))
sub <- lm(mpg ~ wt + hp, data = mtcars, subset = cyl %in% c(4, 6))
jstr <- function(x) paste0("\"", gsub("\"", "\\\\\"", x), "\"", collapse = ", ")
lines <- c(
  "{",
  sprintf("  \"source\": \"R %s, lm(mpg ~ wt + hp, data = mtcars), hatvalues, cooks.distance\",",
          paste(R.version$major, R.version$minor, sep = ".")),
  sprintf("  \"n\": %d,", nobs(fit)),
  sprintf("  \"terms\": [%s],", jstr(rownames(cf))),
  sprintf("  \"estimate\": [%s],", paste(jnum(cf[, 1]), collapse = ", ")),
  sprintf("  \"std_error\": [%s],", paste(jnum(cf[, 2]), collapse = ", ")),
  sprintf("  \"sigma\": %s,", jnum(summary(fit)$sigma)),
  sprintf("  \"ids\": [%s],", jstr(names(fitted(fit)))),
  sprintf("  \"fitted\": [%s],", paste(jnum(fitted(fit)), collapse = ", ")),
  sprintf("  \"leverage\": [%s],", paste(jnum(hatvalues(fit)), collapse = ", ")),
  sprintf("  \"cooks_distance\": [%s],", paste(jnum(cooks.distance(fit)), collapse = ", ")),
  # The same model on the 4- and 6-cylinder cars only.
  sprintf("  \"subset\": \"cyl %%in%% c(4, 6)\","),
  sprintf("  \"subset_n\": %d,", nobs(sub)),
  sprintf("  \"subset_estimate\": [%s]", paste(jnum(coef(sub)), collapse = ", ")),
  "}"
)
writeLines(lines, file.path(out_dir, "mtcars_lm.json"))
