# gen_rdata.R writes data sets shipped with R (its datasets package) as the
# CSV files R's own writers make, and the fits R's lm gives on them, for
# the decoder's and the fit's checks on real files.
#
# Oracle: R (Debian's r-base-core): utils::write.csv, utils::write.csv2,
# stats::lm. Data: datasets::airquality (New York, May to September 1973;
# 153 days, NA where a reading is missing: Ozone 37, Solar.R 7, 42 rows
# with at least one).
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
  sprintf("  \"r_squared\": %s", jnum(summary(fit)$r.squared)),
  "}"
)
writeLines(lines, file.path(out_dir, "airquality_lm.json"))
