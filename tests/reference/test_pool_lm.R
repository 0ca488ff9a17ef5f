# The group stage with method ols against R's lm (r-base-core, stats::lm): coefficients,
# standard errors, t (and dof, and the residual variance sigma2 = RSS / (n - k)) for a
# covariate design and a cell-means two-group design over 200 simulated regions of 30
# synthetic volunteers listening to melodies, some regions with subjects missing. The
# library is run through a ROI summaries table and a group config (pool_probe run).
# Prints the largest relative errors; exits non-zero when one exceeds 1e-6.
probe <- file.path(Sys.getenv("BOLDSUM_PROBE_DIR"), "pool_probe")
if (!file.exists(probe)) stop("pool_probe not found in BOLDSUM_PROBE_DIR")
dir <- tempfile("pool_lm_")
dir.create(dir)
set.seed(31415)

n <- 30
regions <- 200
ids <- sprintf("sub-%02d", seq_len(n))
hours <- round(rexp(n, 1 / 5), 2)   # weekly listening hours
group <- sample(rep(c("choir", "band", "none"), c(8, 10, 12)))
write.table(data.frame(participant_id = ids, hours = hours, group = group),
            file.path(dir, "participants.tsv"), sep = "\t", quote = FALSE, row.names = FALSE)
num <- function(x) ifelse(is.finite(x), sprintf("%.17g", x), "n/a")
sim <- list()
rows <- list()
for (r in seq_len(regions)) {
  v <- runif(n, 0.1, 2)
  y <- 1 + 0.1 * hours + 0.5 * (group == "choir") + rnorm(n, sd = sqrt(0.5 + v))
  if (r %% 5 == 2) y[sample(n, 3)] <- NA
  sim[[r]] <- list(y = y, v = v)
  rows[[r]] <- data.frame(subject = ids, contrast = "melody", region = sprintf("roi%03d", r),
                          estimate = num(y), variance = num(v), dof = 200)
}
write.table(do.call(rbind, rows), file.path(dir, "summaries.tsv"), sep = "\t", quote = FALSE,
            row.names = FALSE)

run_pool <- function(name, yaml) {
  config <- file.path(dir, paste0(name, ".yaml"))
  writeLines(c("input: summaries.tsv", "participants: participants.tsv", "method: ols",
               paste0("output: out_", name), yaml), config)
  if (system2(probe, c("run", config), stdout = FALSE) != 0) stop("pool_probe failed: ", name)
  read.delim(file.path(dir, paste0("out_", name), "regions.tsv"), na.strings = "n/a",
             stringsAsFactors = FALSE)
}

# Design matrices as documented in src/pool/group_design.h. The covariate is used
# uncentred here (centre: false) so that lm's intercept is the same parameter.
designs <- list(
  covariate = list(x = cbind(intercept = 1, hours = hours),
                   yaml = c("design:", "  covariates: [{column: hours, centre: false}]")),
  groups = list(x = cbind(group_band = as.numeric(group == "band"),
                          group_choir = as.numeric(group == "choir"),
                          group_none = as.numeric(group == "none")),
                yaml = c("design:", "  intercept: false",
                         "  factor: {column: group, coding: cell_means}")))

rel <- function(ours, ref, floor) abs(ours - ref) / pmax(abs(ref), floor)
worst <- list()
note <- function(key, value) worst[[key]] <<- max(c(worst[[key]], value))
for (name in names(designs)) {
  x_all <- designs[[name]]$x
  out <- run_pool(name, designs[[name]]$yaml)
  for (r in seq_len(regions)) {
    keep <- is.finite(sim[[r]]$y)
    fit <- lm(sim[[r]]$y[keep] ~ x_all[keep, , drop = FALSE] - 1)
    table <- summary(fit)$coefficients
    ours <- out[out$region == sprintf("roi%03d", r), ]
    for (j in seq_len(ncol(x_all))) {
      row <- ours[ours$group_contrast == colnames(x_all)[j], ]
      note(paste(name, "coefficient (rel. to max(|b|, se))"),
           rel(row$estimate, table[j, 1], table[j, 2]))
      note(paste(name, "standard error"), rel(sqrt(row$variance), table[j, 2], 0))
      note(paste(name, "t"), rel(row$t, table[j, 3], 1))
      note(paste(name, "dof mismatches"), as.numeric(row$dof != fit$df.residual))
    }
    note(paste(name, "sigma2"), rel(ours$sigma2[1], summary(fit)$sigma^2, 0))
  }
}
failed <- FALSE
for (key in names(worst)) {
  bad <- !is.finite(worst[[key]]) || worst[[key]] > 1e-6
  failed <- failed || bad
  cat(sprintf("ols vs lm, %-44s max error %.3g%s\n", key, worst[[key]], if (bad) "  FAIL" else ""))
}
unlink(dir, recursive = TRUE)
if (failed) quit(status = 1)
