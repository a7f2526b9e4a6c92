# Draws the CSV of scaling_sweep.sh as four small panels (CPU microseconds per
# record against each factor, log-log, one line per refit setting; the
# median over rounds, with every round's point shown faintly).
#
#   Rscript src/bench/scaling_plot.R sweep.csv docs/scaling.svg
args <- commandArgs(trailingOnly = TRUE)
if (length(args) != 2) stop("usage: Rscript scaling_plot.R SWEEP.csv OUT.svg")
d <- read.csv(args[1], stringsAsFactors = FALSE)
need <- c("factor", "value", "setting", "user_ns_per_record")
if (!all(need %in% names(d))) stop(args[1], ": not a scaling_sweep.sh file (columns ", paste(need, collapse = ", "), ")")

svg(args[2], width = 8, height = 6.2, pointsize = 10)
op <- par(mfrow = c(2, 2), mar = c(4.2, 4.8, 2.4, 1), mgp = c(3.4, 0.7, 0), las = 1)
panels <- list(
  series = "series in the feed",
  window = "window (records)",
  coefficients = "coefficients",
  draws = "draws (simulate)")
colours <- c(recommended = "#1b6b93", every = "#c0392b")
labels <- c(recommended = "recommended setting", every = "refit before every record")
d$us <- d$user_ns_per_record / 1000
ylim <- range(d$us[d$factor %in% names(panels)])
yticks <- c(1, 2, 5, 10, 20, 50, 100, 200, 500)
for (f in names(panels)) {
  p <- d[d$factor == f, ]
  if (nrow(p) == 0) next
  plot(NA, log = "xy", xlim = range(p$value), ylim = ylim, xaxt = "n", yaxt = "n",
       xlab = panels[[f]], ylab = "CPU \u00b5s per record", main = paste("cost against", panels[[f]]))
  axis(2, at = yticks, labels = yticks)
  axis(1, at = sort(unique(p$value)), labels = format(sort(unique(p$value)), big.mark = ",", scientific = FALSE))
  grid(equilogs = FALSE, col = "grey88", lty = 1)
  for (s in intersect(names(colours), unique(p$setting))) {
    q <- p[p$setting == s, ]
    points(q$value, q$us, col = adjustcolor(colours[[s]], 0.35), pch = 16, cex = 0.8)
    m <- aggregate(us ~ value, data = q, FUN = median)
    lines(m$value, m$us, col = colours[[s]], lwd = 2, type = "o", pch = 16)
  }
  if (f == "series")
    legend("topleft", legend = labels, col = colours, lwd = 2, bty = "n", inset = 0.02)
}
par(op)
invisible(dev.off())
