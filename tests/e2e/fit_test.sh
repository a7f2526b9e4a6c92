#!/usr/bin/env bash
# End-to-end: `tallyd fit` on a feed file, checked against R's glm on the same
# data. Usage: fit_test.sh TALLYD SOURCE_DIR
# Reference: R (r-base-core, r-cran-mass), MASS::ships, the ship-damage data of
# McCullagh and Nelder (1989, section 6.3.2): Poisson, offset log(service).
set -euo pipefail
tallyd=$1
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fail() { echo "FAIL: $*" >&2; exit 1; }
command -v Rscript >/dev/null || fail "Rscript not found (install r-base-core r-cran-mass)"

# R writes the ships data as a tallyd feed (dummy columns for the factors, one
# record a day so that times increase) and its own Poisson and quasi-Poisson fits.
Rscript --vanilla - "$tmp" <<'RSCRIPT'
args <- commandArgs(trailingOnly = TRUE); out <- args[1]
library(MASS)
d <- subset(ships, service > 0)
d$year <- factor(d$year); d$period <- factor(d$period)
X <- model.matrix(~ type + year + period, d)
colnames(X) <- gsub("[^A-Za-z0-9]", "_", colnames(X))
feed <- data.frame(time = 1700000000 + 86400 * seq_len(nrow(d)), series = "ships",
                   count = d$incidents, exposure = d$service, X[, -1, drop = FALSE])
write.csv(feed, file.path(out, "ships.csv"), row.names = FALSE, quote = FALSE)
ctl <- glm.control(epsilon = 1e-12, maxit = 100)
fit <- glm(incidents ~ type + year + period + offset(log(service)), family = poisson, data = d, control = ctl)
q <- glm(incidents ~ type + year + period + offset(log(service)), family = quasipoisson, data = d, control = ctl)
s <- summary(fit)$coefficients; sq <- summary(q)
write.table(data.frame(name = c("intercept", colnames(X)[-1]), estimate = s[, 1], se = s[, 2], qse = sq$coefficients[, 2]),
            file.path(out, "coef.txt"), row.names = FALSE, col.names = FALSE, quote = FALSE)
cat(sprintf("%.15g %.15g %.15g %.15g %d\n", deviance(fit), fit$null.deviance, AIC(fit), sq$dispersion, fit$df.residual),
    file = file.path(out, "scalars.txt"))
RSCRIPT

cols=$(head -1 "$tmp/ships.csv" | cut -d, -f5- )
"$tallyd" fit "$tmp/ships.csv" --series ships --json > "$tmp/fit.json" || fail "fit --json failed"
"$tallyd" fit "$tmp/ships.csv" --family quasipoisson --json > "$tmp/qfit.json" || fail "quasi fit failed"

python3 - "$tmp" <<'PY'
import json, sys, os
tmp = sys.argv[1]
fit = json.load(open(os.path.join(tmp, "fit.json")))
qfit = json.load(open(os.path.join(tmp, "qfit.json")))
dev, null_dev, aic, disp, df = open(os.path.join(tmp, "scalars.txt")).read().split()
def rel(a, b): return abs(a - b) / max(abs(b), 1e-300)
bad = []
for line in open(os.path.join(tmp, "coef.txt")):
    name, est, se, qse = line.split()
    c = fit["coefficients"][name]
    if rel(c["estimate"], float(est)) > 1e-6: bad.append(f"{name} estimate {c['estimate']} vs R {est}")
    if rel(c["std_error"], float(se)) > 1e-4: bad.append(f"{name} std_error {c['std_error']} vs R {se}")
    qc = qfit["coefficients"][name]
    if rel(qc["std_error"], float(qse)) > 1e-4: bad.append(f"{name} quasi std_error {qc['std_error']} vs R {qse}")
for key, ref, tol in [("deviance", dev, 1e-6), ("null_deviance", null_dev, 1e-6), ("aic", aic, 1e-6)]:
    if rel(fit[key], float(ref)) > tol: bad.append(f"{key} {fit[key]} vs R {ref}")
if rel(qfit["dispersion"], float(disp)) > 1e-4: bad.append(f"dispersion {qfit['dispersion']} vs R {disp}")
if fit["df_residual"] != int(df): bad.append(f"df_residual {fit['df_residual']} vs R {df}")
if qfit["aic"] is not None: bad.append("quasi-Poisson AIC should be null (undefined)")
for key in ["coefficients", "deviance", "null_deviance", "aic", "dispersion", "theta", "df_residual", "n", "iterations"]:
    if key not in fit: bad.append(f"missing key {key}")
if bad:
    print("\n".join(bad)); sys.exit(1)
print("fit --json matches R glm on MASS::ships")
PY

# --compare: every family/link pair, best AIC first, quasi-Poisson said to have no AIC.
"$tallyd" fit "$tmp/ships.csv" --compare > "$tmp/compare.txt" || fail "--compare failed"
grep -q "AIC undefined (quasi-likelihood)" "$tmp/compare.txt" || fail "--compare should explain the missing quasi-Poisson AIC"
[[ $(grep -cE '^(poisson|negbin|quasipoisson) ' "$tmp/compare.txt") -eq 9 ]] || { cat "$tmp/compare.txt"; fail "expected 9 rows"; }
first=$(grep -E '^(poisson|negbin|quasipoisson) ' "$tmp/compare.txt" | head -1)
[[ $(awk '{print $4}' <<<"$first") == "0.000" ]] || fail "the first row should have dAIC 0: $first"
# The text table names every coefficient.
"$tallyd" fit "$tmp/ships.csv" > "$tmp/table.txt"
grep -q "^intercept " "$tmp/table.txt" || fail "text table lacks the intercept row"
grep -q "AIC " "$tmp/table.txt" || fail "text table lacks AIC"
echo "fit e2e: all checks passed"
