/* svg — figures for `tachist report --plots`: psychometric curves, confusion matrices, reaction-time
 * and frame-interval histograms, and an index.html that shows them.
 *
 * Each figure is a standalone SVG 1.1 document with a white background, axes labelled with their
 * units, and colours from the Okabe–Ito palette (readable with the common colour-vision
 * deficiencies); the confusion matrix is one-hue shading with the count printed in every cell.
 * Nothing here prints to the terminal; errors come back as -1 with a malloc'd sentence in *ERR. */
#ifndef TACHIST_SVG_H
#define TACHIST_SVG_H

#include <stdbool.h>
#include <stddef.h>
#include <stdio.h>

#include "analysis.h"

/* One psychometric series: data points with Wilson intervals, the fitted curve when the fit
 * succeeded, its threshold marked with the bootstrap interval. */
void svg_psychometric(FILE *out, const struct analysis_series *se, int m, double conf,
		      const char *title);
/* Confusion matrix number I of A as a shaded grid with counts and row percentages. */
void svg_confusion(FILE *out, const struct analysis *a, size_t i, const char *title);
/* Histogram of N values V with NBINS bins (0 = automatic); MARK, when finite, draws a dashed
 * reference line (for example the measured frame period); LOGY puts counts on a log scale. */
void svg_histogram(FILE *out, const double *v, size_t n, int nbins, double mark, bool logy,
		   const char *title, const char *xlabel, const char *ylabel);

/* One line of svg_lines: N points (X, Y) with a range [LO, HI] at each (NaN: none drawn). */
struct svg_line {
	const char *label;
	const double *x, *y, *lo, *hi;
	size_t n;
};
/* N lines in the Okabe–Ito colours with a legend, each point's range as a bar (offset a little
 * per line so bars at the same x stay apart); MARK, when finite, a dashed horizontal target line.
 * `tachist forecast --plot` draws interval width against trials per level with it. */
void svg_lines(FILE *out, const struct svg_line *lines, size_t n, double mark, const char *title,
	       const char *xlabel, const char *ylabel);

/* Writes every figure of A into DIR (created when missing) and DIR/index.html. Returns the number
 * of figures written, or -1 with *ERR. */
int svg_report(const struct analysis *a, const char *dir, char **err);

#endif
