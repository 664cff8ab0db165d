# Monthly notifications: a LOWESS trend and a robust seasonal-trend decomposition (STL).
#
# Top panel: the observed monthly counts with a LOWESS smooth of the long-run level.
# Lower panels: STL's seasonal component and its remainder, with the months that the robust
# fit down-weighted (candidate outbreaks or reporting artefacts) marked. Base R only
# (stats + graphics), so it runs on any R installation without extra packages.
#
# By hand:  cd recipes/notifications-seasonal-trend && Rscript figure.R
# It writes figure.png (300 ppi at 180 mm) and figure.svg next to this file.
# The data are invented (see data/generate.py); not for public-health decisions.

COUNTS_FILE <- "data/enteric_notifications.csv"
WIDTH_IN <- 180 / 25.4
HEIGHT_IN <- 150 / 25.4
LOWESS_F <- 0.3          # share of the months in each local fit: about three years here
STL_ARGS <- list(s.window = 13, s.degree = 0, t.window = 25, t.degree = 1, l.window = 13,
                 l.degree = 1, s.jump = 2, t.jump = 3, l.jump = 2, robust = TRUE,
                 inner = 1, outer = 15)  # R's defaults for robust = TRUE, written out
FLAG_WEIGHT <- 0.5       # robustness weight below which a month is marked
OKABE_ITO <- c(blue = "#0072B2", vermillion = "#D55E00", green = "#009E73")

# Read the counts and check the months are consecutive: STL needs an unbroken monthly series,
# and a gap silently shifts every later month into the wrong season.
read_counts <- function(path = COUNTS_FILE) {
  d <- read.csv(path, stringsAsFactors = FALSE)
  if (!all(c("month", "notifications") %in% names(d))) {
    stop(sprintf("%s needs columns 'month' (YYYY-MM) and 'notifications'", path), call. = FALSE)
  }
  year <- as.integer(substr(d$month, 1, 4))
  mon <- as.integer(substr(d$month, 6, 7))
  index <- (year - year[1]) * 12 + (mon - mon[1])
  if (anyNA(index) || any(index != seq_len(nrow(d)) - 1)) {
    stop(sprintf("%s: months must be consecutive YYYY-MM with no gaps", path), call. = FALSE)
  }
  d$time <- year + (mon - 1) / 12
  d
}

# LOWESS (Cleveland 1979) of counts on time. delta = 0 asks for every point to be fitted
# exactly rather than interpolated, so the smooth does not depend on R's speed-up default.
trend_lowess <- function(d, f = LOWESS_F) {
  lowess(d$time, d$notifications, f = f, iter = 3, delta = 0)$y
}

# Robust STL (Cleveland et al. 1990). Returns the three components and the robustness
# weights; months with small weights are the ones the fit treated as outliers.
decompose_stl <- function(d, args = STL_ARGS) {
  start <- c(floor(d$time[1] + 1e-9), round((d$time[1] %% 1) * 12) + 1)
  y <- ts(d$notifications, frequency = 12, start = start)
  fit <- do.call(stl, c(list(x = y), args))
  data.frame(seasonal = as.numeric(fit$time.series[, "seasonal"]),
             trend = as.numeric(fit$time.series[, "trend"]),
             remainder = as.numeric(fit$time.series[, "remainder"]),
             weight = as.numeric(fit$weights))
}

panel_axes <- function(d, ylab, bottom = FALSE) {
  years <- seq(ceiling(min(d$time)), ceiling(max(d$time)))
  axis(1, at = years, labels = if (bottom) years else FALSE)
  axis(2)
  abline(v = years, col = "grey90", lwd = 0.6)
  mtext(ylab, side = 2, line = 2.8, cex = 0.9, las = 0)
}

draw <- function(d, smooth, parts) {
  layout(matrix(1:3), heights = c(1.5, 1, 1))
  # layout() shrinks text for three rows; cex = 1 keeps it at the device's 9 pt for print.
  op <- par(cex = 1, oma = c(2.2, 0, 0.4, 0), mar = c(1.2, 4.4, 1.6, 1), las = 1,
            mgp = c(2.2, 0.6, 0), tcl = -0.3, cex.axis = 0.9, cex.main = 1)
  on.exit({
    par(op)
    layout(1)
  })
  flagged <- parts$weight < FLAG_WEIGHT

  plot(d$time, d$notifications, type = "n", axes = FALSE, xlab = "", ylab = "",
       ylim = c(0, max(d$notifications) * 1.05))
  panel_axes(d, "Notifications per month")
  lines(d$time, d$notifications, col = "grey55", lwd = 0.8)
  points(d$time, d$notifications, pch = 16, cex = 0.45, col = "grey35")
  lines(d$time, smooth, col = OKABE_ITO[["blue"]], lwd = 2.4)
  points(d$time[flagged], d$notifications[flagged], pch = 21, cex = 1.3, lwd = 1.4,
         col = OKABE_ITO[["vermillion"]])
  title(main = "Observed counts with LOWESS trend", adj = 0, font.main = 1)
  legend("topleft", bty = "n", cex = 0.9, inset = c(0.01, 0),
         legend = c("monthly count", sprintf("LOWESS, f = %.1f", LOWESS_F),
                    sprintf("STL robustness weight < %.1f", FLAG_WEIGHT)),
         lty = c(1, 1, NA), lwd = c(0.8, 2.4, 1.4), pch = c(16, NA, 21), pt.cex = c(0.6, 1, 1.2),
         col = c("grey35", OKABE_ITO[["blue"]], OKABE_ITO[["vermillion"]]))

  plot(d$time, parts$seasonal, type = "n", axes = FALSE, xlab = "", ylab = "")
  panel_axes(d, "Seasonal")
  abline(h = 0, col = "grey60")
  lines(d$time, parts$seasonal, col = OKABE_ITO[["green"]], lwd = 1.6)
  title(main = "STL seasonal component (counts above or below the trend)", adj = 0,
        font.main = 1)

  plot(d$time, parts$remainder, type = "n", axes = FALSE, xlab = "", ylab = "")
  panel_axes(d, "Remainder", bottom = TRUE)
  abline(h = 0, col = "grey60")
  segments(d$time, 0, d$time, parts$remainder, col = ifelse(flagged,
           OKABE_ITO[["vermillion"]], "grey45"), lwd = ifelse(flagged, 2, 1), lend = "butt")
  title(main = "STL remainder (robust fit; marked months down-weighted)", adj = 0,
        font.main = 1)
  mtext("Month of notification", side = 1, outer = TRUE, line = 1, cex = 0.9)
  invisible(NULL)
}

main <- function() {
  d <- read_counts()
  smooth <- trend_lowess(d)
  parts <- decompose_stl(d)
  flagged <- parts$weight < FLAG_WEIGHT
  cat("Months down-weighted by robust STL:", paste(d$month[flagged], collapse = ", "), "\n")
  png("figure.png", width = WIDTH_IN, height = HEIGHT_IN, units = "in", res = 300,
      type = "cairo", bg = "white", pointsize = 9)
  draw(d, smooth, parts)
  invisible(dev.off())
  svg("figure.svg", width = WIDTH_IN, height = HEIGHT_IN, bg = "white", pointsize = 9)
  draw(d, smooth, parts)
  invisible(dev.off())
}

# Run only when executed as a script (Rscript figure.R), not when source()d by a test.
if (sys.nframe() == 0L) main()
