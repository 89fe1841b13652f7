#!/bin/sh
# Writes cars.csv and women.csv from R's datasets package (Debian's
# r-base-core). Run from this folder: sh gen.sh
set -e
Rscript -e 'v <- R.version.string; for (nm in c("cars","women")) { d <- get(nm); f <- paste0(nm, ".csv"); con <- file(f, "w"); writeLines(paste0("# R datasets package, data set ", nm, ", written by ", v, " with write.csv (gen.sh)"), con); write.csv(d, con, row.names=FALSE); close(con) }'
# brute.csv: the brute-force fragility oracle (plain refits in R).
Rscript gen_brute.R > brute.csv
