# Creatinine bias of six laboratories against the reference method.
#
# A dot plot of every paired difference (laboratory minus reference) per laboratory, with the
# mean difference and its 95 % t interval drawn over the points. Base R graphics only, so the
# recipe runs on any R installation without extra packages.
#
# By hand:  cd recipes/assay-bias-by-laboratory && Rscript figure.R
# It writes figure.png (300 ppi at 180 mm) and figure.svg next to this file.
# The data are invented (see data/generate.py); not for clinical decisions.

PANEL_FILE <- "data/creatinine_panel.csv"
WIDTH_IN <- 180 / 25.4     # two-column print width
HEIGHT_IN <- 105 / 25.4
ACCEPT <- 10               # invented network acceptance limit for bias, umol/L
LEVEL <- 0.95
OKABE_ITO <- c(blue = "#0072B2", vermillion = "#D55E00", grey = "#999999")

# Read the panel and add the paired difference. Stops with a plain message (not an R trace)
# when a column is missing, because a copied recipe is often pointed at new data.
read_panel <- function(path = PANEL_FILE) {
  d <- read.csv(path, stringsAsFactors = FALSE)
  need <- c("lab", "panel_item", "reference_umol_l", "lab_umol_l")
  missing <- setdiff(need, names(d))
  if (length(missing) > 0) {
    stop(sprintf("%s lacks column(s): %s", path, paste(missing, collapse = ", ")), call. = FALSE)
  }
  d$difference <- d$lab_umol_l - d$reference_umol_l
  d
}

# One row per laboratory: n, mean difference, SD, the two-sided t interval for the mean at
# `level`, and the one-sample t test of "no bias". Why t and not z: with 18-30 specimens per
# laboratory the normal quantile would make the intervals visibly too narrow.
lab_summary <- function(d, level = LEVEL) {
  groups <- split(d$difference, d$lab)
  rows <- lapply(names(groups), function(lab) {
    x <- groups[[lab]]
    n <- length(x)
    m <- mean(x)
    se <- sd(x) / sqrt(n)
    half <- qt(1 - (1 - level) / 2, df = n - 1) * se
    data.frame(lab = lab, n = n, mean = m, sd = sd(x), lower = m - half, upper = m + half,
               t = m / se, p_value = 2 * pt(-abs(m / se), df = n - 1),
               stringsAsFactors = FALSE)
  })
  out <- do.call(rbind, rows)
  out <- out[order(out$mean), ]
  rownames(out) <- NULL
  out
}

# Interval colour: vermillion when the interval excludes zero (a detectable bias), blue when
# it does not. Whether the bias matters is judged against the grey acceptance band instead.
interval_colour <- function(s) {
  ifelse(s$lower > 0 | s$upper < 0, OKABE_ITO[["vermillion"]], OKABE_ITO[["blue"]])
}

draw <- function(d, s) {
  op <- par(mar = c(3.6, 6.2, 2.6, 13.5), las = 1, mgp = c(2.2, 0.6, 0),
            tcl = -0.3, cex.axis = 0.9)
  on.exit(par(op))
  y_of <- setNames(seq_len(nrow(s)), s$lab)
  span <- max(abs(range(d$difference)), ACCEPT) * 1.08
  plot(NA, xlim = c(-span, span), ylim = c(0.5, nrow(s) + 0.5), yaxt = "n", bty = "n",
       xlab = expression("Laboratory minus reference (" * mu * "mol/L)"), ylab = "")
  rect(-ACCEPT, 0.3, ACCEPT, nrow(s) + 0.7, col = "grey93", border = NA)
  abline(v = 0, col = "grey40", lwd = 0.8)
  axis(2, at = y_of, labels = s$lab, tick = FALSE)
  set.seed(2024)  # the vertical jitter is random; a fixed seed keeps the figure reproducible
  jit <- runif(nrow(d), -0.22, 0.22)
  points(d$difference, y_of[d$lab] + jit, pch = 21, cex = 0.75, lwd = 0.6,
         col = "grey35", bg = adjustcolor("grey70", 0.6))
  col <- interval_colour(s)
  segments(s$lower, y_of, s$upper, y_of, lwd = 3.2, col = col, lend = "butt")
  points(s$mean, y_of, pch = 23, cex = 1.25, bg = "white", col = col, lwd = 1.6)
  label <- sprintf("%2d   %+5.1f  [%+5.1f, %+5.1f]", s$n, s$mean, s$lower, s$upper)
  mtext(label, side = 4, at = y_of, line = 0.6, adj = 0, cex = 0.85, family = "mono")
  mtext(sprintf(" n   mean   %d%% t interval", round(100 * LEVEL)), side = 4,
        at = nrow(s) + 0.62, line = 0.6, adj = 0, cex = 0.85, family = "mono", font = 2)
  legend(x = -span, y = nrow(s) + 0.75, yjust = 0, xpd = NA, horiz = TRUE, bty = "n",
         cex = 0.9, x.intersp = 0.8, text.width = NA,
         legend = c("interval includes 0", "interval excludes 0",
                    sprintf("acceptance limit \u00b1%d", ACCEPT)),
         pch = c(23, 23, 15), pt.cex = c(1.1, 1.1, 1.8), pt.bg = "white",
         col = c(OKABE_ITO[["blue"]], OKABE_ITO[["vermillion"]], "grey88"))
  invisible(s)
}

main <- function() {
  d <- read_panel()
  s <- lab_summary(d)
  print(s, digits = 4, row.names = FALSE)
  png("figure.png", width = WIDTH_IN, height = HEIGHT_IN, units = "in", res = 300,
      type = "cairo", bg = "white", pointsize = 9)
  draw(d, s)
  invisible(dev.off())
  svg("figure.svg", width = WIDTH_IN, height = HEIGHT_IN, bg = "white", pointsize = 9)
  draw(d, s)
  invisible(dev.off())
}

# Run only when executed as a script (Rscript figure.R), not when source()d by a test.
if (sys.nframe() == 0L) main()
