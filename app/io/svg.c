/* svg — SVG figures and their index page (see svg.h).
 *
 * A figure is W × H user units with a plot area inset by fixed margins; data coordinates map
 * linearly onto it (struct frame). Axis ticks are "nice" numbers (1, 2 or 5 × 10^k). Text is
 * XML-escaped on the way out, since category and image names come from the user's files.
 * Colours (Okabe & Ito 2008): blue #0072B2 for data, vermillion #D55E00 for fitted curves,
 * bluish green #009E73 for thresholds, grey for guides. Called by cmd_report. */
#include "svg.h"

#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "diag.h"
#include "psyfn.h"

#define W 640.0
#define H 440.0
#define ML 72.0
#define MR 24.0
#define MT 48.0
#define MB 64.0
#define C_DATA "#0072B2"
#define C_FIT "#D55E00"
#define C_THR "#009E73"
#define C_GUIDE "#999999"

struct frame {
	double x0, x1, y0, y1;   /* data range */
	double px0, px1, py0, py1; /* pixel box: left, right, bottom, top */
};

static double fx(const struct frame *f, double x)
{
	return f->px0 + (x - f->x0) / (f->x1 - f->x0) * (f->px1 - f->px0);
}

static double fy(const struct frame *f, double y)
{
	return f->py0 - (y - f->y0) / (f->y1 - f->y0) * (f->py0 - f->py1);
}

static void put_text(FILE *out, const char *s)
{
	for (; s && *s; s++) {
		switch (*s) {
		case '&': fputs("&amp;", out); break;
		case '<': fputs("&lt;", out); break;
		case '>': fputs("&gt;", out); break;
		case '"': fputs("&quot;", out); break;
		case '\'': fputs("&apos;", out); break;
		default:
			/* Control characters are not allowed in XML 1.0. */
			if ((unsigned char)*s >= 0x20 || *s == '\t' || *s == '\n')
				fputc(*s, out);
		}
	}
}

static void begin(FILE *out, double w, double h, const char *title)
{
	fprintf(out, "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n"
		"<svg xmlns=\"http://www.w3.org/2000/svg\" version=\"1.1\" width=\"%.0f\" "
		"height=\"%.0f\" viewBox=\"0 0 %.0f %.0f\" font-family=\"sans-serif\" "
		"font-size=\"13\">\n<title>", w, h, w, h);
	put_text(out, title);
	fprintf(out, "</title>\n<rect width=\"100%%\" height=\"100%%\" fill=\"#ffffff\"/>\n"
		"<text x=\"%.1f\" y=\"24\" text-anchor=\"middle\" font-size=\"15\">", w / 2);
	put_text(out, title);
	fputs("</text>\n", out);
}

/* A nice step for about N ticks over RANGE. */
static double nice_step(double range, int n)
{
	double raw = range / n, p = pow(10, floor(log10(raw))), r = raw / p;
	return (r < 1.5 ? 1 : r < 3.5 ? 2 : r < 7.5 ? 5 : 10) * p;
}

/* Axis lines, ticks and labels; Y_TICKS false leaves the y ticks to the caller. */
static void axes(FILE *out, const struct frame *f, const char *xlabel, const char *ylabel,
		 bool y_ticks)
{
	fprintf(out, "<g stroke=\"#000000\" stroke-width=\"1\" fill=\"none\">"
		"<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>"
		"<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/></g>\n",
		f->px0, f->py0, f->px1, f->py0, f->px0, f->py0, f->px0, f->py1);
	double sx = nice_step(f->x1 - f->x0, 6), sy = nice_step(f->y1 - f->y0, 5);
	for (double t = ceil(f->x0 / sx - 1e-9) * sx; t <= f->x1 + 1e-9 * sx; t += sx) {
		double X = fx(f, t), v = fabs(t) < 1e-12 * sx ? 0 : t;
		fprintf(out, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#000000\"/>"
			"<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">%g</text>\n",
			X, f->py0, X, f->py0 + 5, X, f->py0 + 20, v);
	}
	for (double t = ceil(f->y0 / sy - 1e-9) * sy; y_ticks && t <= f->y1 + 1e-9 * sy; t += sy) {
		double Y = fy(f, t), v = fabs(t) < 1e-12 * sy ? 0 : t;
		fprintf(out, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#000000\"/>"
			"<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">%g</text>\n",
			f->px0 - 5, Y, f->px0, Y, f->px0 - 8, Y + 4, v);
	}
	fprintf(out, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">", (f->px0 + f->px1) / 2,
		f->py0 + 44);
	put_text(out, xlabel);
	fprintf(out, "</text>\n<text transform=\"translate(%.1f %.1f) rotate(-90)\" "
		"text-anchor=\"middle\">", f->px0 - 52, (f->py0 + f->py1) / 2);
	put_text(out, ylabel);
	fputs("</text>\n", out);
}

static void default_frame(struct frame *f, double x0, double x1, double y0, double y1)
{
	if (!(x1 > x0)) {
		x0 -= 0.5;
		x1 += 0.5;
	}
	*f = (struct frame){x0, x1, y0, y1, ML, W - MR, H - MB, MT};
}

void svg_psychometric(FILE *out, const struct analysis_series *se, int m, double conf,
		      const char *title)
{
	begin(out, W, H, title);
	double lo = INFINITY, hi = -INFINITY;
	for (size_t i = 0; i < se->npts; i++) {
		lo = fmin(lo, se->pts[i].level);
		hi = fmax(hi, se->pts[i].level);
	}
	if (se->npts == 0)
		lo = 0, hi = 1;
	double pad = (hi - lo) * 0.05;
	struct frame f;
	/* Padded on both sides so a point at the lowest level stays clear of the axis. */
	default_frame(&f, lo - pad, hi + pad, 0, 1);
	axes(out, &f, "level (units of the stimulus list)", "proportion correct", true);
	/* Chance line. */
	fprintf(out, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"" C_GUIDE "\" "
		"stroke-dasharray=\"2 4\"/>\n<text x=\"%.1f\" y=\"%.1f\" fill=\"#555555\" "
		"text-anchor=\"end\">chance 1/%d</text>\n", f.px0, fy(&f, 1.0 / m), f.px1,
		fy(&f, 1.0 / m), f.px1 - 4, fy(&f, 1.0 / m) - 4, m);
	const struct fit_result *r = &se->fit;
	if (r->status == FIT_OK) {
		fputs("<polyline fill=\"none\" stroke=\"" C_FIT "\" stroke-width=\"2\" points=\"", out);
		for (int i = 0; i <= 200; i++) {
			double x = f.x0 + (f.x1 - f.x0) * i / 200.0;
			fprintf(out, "%.1f,%.1f ", fx(&f, x), fy(&f, psyfn_eval(&r->f, x)));
		}
		fputs("\"/>\n", out);
		if (r->threshold_ok && r->threshold >= f.x0 && r->threshold <= f.x1) {
			double X = fx(&f, r->threshold), Y = fy(&f, r->pc_threshold);
			if (r->has_ci && isfinite(r->threshold_ci[0])) {
				double a = fmax(f.x0, r->threshold_ci[0]), b = fmin(f.x1, r->threshold_ci[1]);
				fprintf(out, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" "
					"stroke=\"" C_THR "\" stroke-width=\"3\"/>\n",
					fx(&f, a), Y, fx(&f, b), Y);
			}
			fprintf(out, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" "
				"stroke=\"" C_THR "\" stroke-dasharray=\"5 3\"/>\n"
				"<text x=\"%.1f\" y=\"%.1f\" fill=\"" C_THR "\">threshold %.4g at %.3g</text>\n",
				X, f.py0, X, Y, X + 6, Y + 16, r->threshold, r->pc_threshold);
		}
	} else {
		fprintf(out, "<text x=\"%.1f\" y=\"%.1f\" fill=\"#555555\">no fit: ", f.px0 + 8, f.py1 + 16);
		put_text(out, r->status == FIT_NO_CONVERGENCE ? "the search did not converge"
							      : "the data cannot support a fit");
		fputs("</text>\n", out);
	}
	for (size_t i = 0; i < se->npts; i++) {
		const struct fit_point *p = &se->pts[i];
		if (p->n == 0)
			continue;
		double lw, up, pc = (double)p->k / (double)p->n;
		stats_ci(STATS_CI_WILSON, p->k, p->n, conf, &lw, &up);
		double X = fx(&f, p->level);
		fprintf(out, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"" C_DATA "\"/>"
			"<circle cx=\"%.1f\" cy=\"%.1f\" r=\"%.1f\" fill=\"" C_DATA "\"/>\n",
			X, fy(&f, lw), X, fy(&f, up), X, fy(&f, pc), 3 + fmin(4.0, sqrt((double)p->n) / 3));
	}
	fprintf(out, "<text x=\"%.1f\" y=\"%.1f\" font-size=\"11\" fill=\"#555555\">points: proportion "
		"correct with %.0f%% Wilson intervals%s%s%s</text>\n</svg>\n", f.px0 + 8, f.py1 - 6,
		conf * 100, r->status == FIT_OK ? "; line: " : "",
		r->status == FIT_OK ? psyfn_shape_name(r->f.shape) : "",
		r->status == FIT_OK ? " fit" : "");
}

void svg_confusion(FILE *out, const struct analysis *a, size_t ic, const char *title)
{
	const struct analysis_confusion *c = &a->conf[ic];
	size_t K = a->ncat;
	double cell = K <= 8 ? 56 : K <= 16 ? 36 : 24, left = 150, top = 70;
	double w = left + cell * (double)K + 40, h = top + cell * (double)K + 70;
	if (w < 480)
		w = 480;
	begin(out, w, h, title);
	for (size_t t = 0; t < K; t++) {
		fprintf(out, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">", left - 6,
			top + cell * ((double)t + 0.5) + 4);
		put_text(out, a->cats[t]);
		fputs("</text>\n", out);
		fprintf(out, "<text transform=\"translate(%.1f %.1f) rotate(-45)\">",
			left + cell * ((double)t + 0.5), top - 6);
		put_text(out, a->cats[t]);
		fputs("</text>\n", out);
		for (size_t ch = 0; ch < K; ch++) {
			unsigned long n = c->counts[t * K + ch];
			double share = c->row_n[t] ? (double)n / (double)c->row_n[t] : 0;
			fprintf(out, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" "
				"fill=\"" C_DATA "\" fill-opacity=\"%.3f\" stroke=\"#cccccc\"/>",
				left + cell * (double)ch, top + cell * (double)t, cell, cell, share);
			fprintf(out, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\" fill=\"%s\" "
				"font-size=\"%d\">%lu</text>\n", left + cell * ((double)ch + 0.5),
				top + cell * ((double)t + 0.5) + 4, share > 0.5 ? "#ffffff" : "#000000",
				cell < 30 ? 9 : 12, n);
		}
	}
	fprintf(out, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">chosen category "
		"(shade: share of the row)</text>\n",
		left + cell * (double)K / 2, top + cell * (double)K + 26);
	fprintf(out, "<text transform=\"translate(16 %.1f) rotate(-90)\" text-anchor=\"middle\">true "
		"category</text>\n</svg>\n", top + cell * (double)K / 2);
}

void svg_histogram(FILE *out, const double *v, size_t n, int nbins, double mark, bool logy,
		   const char *title, const char *xlabel, const char *ylabel)
{
	begin(out, W, H, title);
	double lo = INFINITY, hi = -INFINITY;
	for (size_t i = 0; i < n; i++) {
		lo = fmin(lo, v[i]);
		hi = fmax(hi, v[i]);
	}
	if (isfinite(mark)) {
		lo = fmin(lo, mark);
		hi = fmax(hi, mark);
	}
	if (n == 0 && !isfinite(mark))
		lo = 0, hi = 1;
	if (!(hi > lo))
		lo -= 0.5, hi += 0.5;
	if (nbins <= 0) {
		/* Sturges' rule, bounded (common practice, no source for the bounds). */
		nbins = (int)ceil(log2((double)(n ? n : 1)) + 1);
		nbins = nbins < 10 ? 10 : nbins > 60 ? 60 : nbins;
	}
	unsigned long *cnt = xcalloc((size_t)nbins, sizeof *cnt), top = 1;
	double bw = (hi - lo) / nbins;
	for (size_t i = 0; i < n; i++) {
		int b = (int)((v[i] - lo) / bw);
		b = b < 0 ? 0 : b >= nbins ? nbins - 1 : b;
		if (++cnt[b] > top)
			top = cnt[b];
	}
	struct frame f;
	/* On a log axis a bar of count c has height log10(1 + c), so single rare events (a dropped
	 * frame among thousands) stay visible. */
	double ytop = logy ? log10(1.0 + (double)top) : (double)top;
	default_frame(&f, lo, hi, 0, ytop * 1.05);
	if (logy) {
		axes(out, &f, xlabel, ylabel, false);   /* decades drawn here */
		for (double dec = 1; dec <= (double)top * 1.0001; dec *= 10) {
			double Y = fy(&f, log10(1.0 + dec));
			fprintf(out, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" "
				"stroke=\"#000000\"/><text x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">%.0f"
				"</text>\n", f.px0 - 5, Y, f.px0, Y, f.px0 - 8, Y + 4, dec);
		}
	} else {
		axes(out, &f, xlabel, ylabel, true);
	}
	for (int b = 0; b < nbins; b++) {
		if (!cnt[b])
			continue;
		double h = logy ? log10(1.0 + (double)cnt[b]) : (double)cnt[b];
		double x0 = fx(&f, lo + b * bw), x1 = fx(&f, lo + (b + 1) * bw);
		fprintf(out, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" fill=\"" C_DATA
			"\" stroke=\"#ffffff\" stroke-width=\"0.5\"/>\n", x0, fy(&f, h), x1 - x0,
			f.py0 - fy(&f, h));
	}
	if (isfinite(mark))
		fprintf(out, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"" C_FIT
			"\" stroke-width=\"2\" stroke-dasharray=\"6 3\"/>\n", fx(&f, mark), f.py0,
			fx(&f, mark), f.py1);
	if (n == 0)
		fprintf(out, "<text x=\"%.1f\" y=\"%.1f\" fill=\"#555555\">no data</text>\n",
			f.px0 + 8, f.py1 + 16);
	fputs("</svg>\n", out);
	free(cnt);
}

/* Opens DIR/NAME for writing. */
static FILE *open_in(const char *dir, const char *name, char **err)
{
	char *p = xasprintf("%s/%s", dir, name);
	FILE *f = fopen(p, "w");
	if (!f)
		*err = xasprintf("cannot write %s: %s", p, strerror(errno));
	free(p);
	return f;
}

static int close_checked(FILE *f, const char *dir, const char *name, char **err)
{
	int bad = ferror(f);
	if (fclose(f) != 0 || bad) {
		*err = xasprintf("cannot write %s/%s: %s", dir, name, strerror(errno));
		return -1;
	}
	return 0;
}

struct fig {
	char *file, *caption;
};

static void series_caption(const struct analysis_series *se, char *buf, size_t len)
{
	snprintf(buf, len, "%s%s, block %d%s%s%s", se->subject ? "subject " : "all subjects",
		 se->subject ? se->subject : "", se->block + 1, se->block_name ? " (" : "",
		 se->block_name ? se->block_name : "", se->block_name ? ")" : "");
	if (se->group && *se->group) {
		size_t l = strlen(buf);
		snprintf(buf + l, len - l, ", %s", se->group);
	}
}

int svg_report(const struct analysis *a, const char *dir, char **err)
{
	*err = NULL;
	if (mkdir(dir, 0777) != 0 && errno != EEXIST) {
		*err = xasprintf("cannot create %s: %s", dir, strerror(errno));
		return -1;
	}
	size_t cap = a->nseries + a->nconf + 2 * a->ntiming + 2, nf = 0;
	struct fig *figs = xcalloc(cap, sizeof *figs);
	int rc = -1;
	char cap_buf[512];
	for (size_t i = 0; i < a->nseries; i++) {
		series_caption(&a->series[i], cap_buf, sizeof cap_buf);
		char *title = xasprintf("Psychometric function: %s", cap_buf);
		figs[nf].file = xasprintf("psychometric-%zu.svg", i + 1);
		figs[nf].caption = title;
		FILE *f = open_in(dir, figs[nf].file, err);
		nf++;
		if (!f)
			goto out;
		svg_psychometric(f, &a->series[i], a->opts.m, a->opts.conf, title);
		if (close_checked(f, dir, figs[nf - 1].file, err) < 0)
			goto out;
	}
	for (size_t i = 0; i < a->nconf; i++) {
		const struct analysis_confusion *c = &a->conf[i];
		figs[nf].caption = c->has_level ? xasprintf("Confusion matrix at level %g", c->level)
						: xasprintf("Confusion matrix");
		figs[nf].file = xasprintf("confusion-%zu.svg", i + 1);
		FILE *f = open_in(dir, figs[nf].file, err);
		nf++;
		if (!f)
			goto out;
		svg_confusion(f, a, i, figs[nf - 1].caption);
		if (close_checked(f, dir, figs[nf - 1].file, err) < 0)
			goto out;
	}
	figs[nf].file = xstrdup("rt.svg");
	figs[nf].caption = xstrdup("Reaction times of correct trials");
	FILE *f = open_in(dir, figs[nf].file, err);
	nf++;
	if (!f)
		goto out;
	svg_histogram(f, a->rt_ms, a->nrt, 0, NAN, false, figs[nf - 1].caption,
		      "reaction time from stimulus onset (ms)", "correct trials");
	if (close_checked(f, dir, figs[nf - 1].file, err) < 0)
		goto out;
	for (size_t i = 0; i < a->ntiming; i++) {
		const struct analysis_timing *t = &a->timing[i];
		if (!t->nframe_ms)
			continue;
		figs[nf].file = xasprintf("frames-%zu.svg", i + 1);
		figs[nf].caption = xasprintf("Frame intervals, session %.8s (%s timing)", t->session,
					     t->timing_mode ? t->timing_mode : "unknown");
		f = open_in(dir, figs[nf].file, err);
		nf++;
		if (!f)
			goto out;
		svg_histogram(f, t->frame_ms, t->nframe_ms, 0,
			      t->refresh_hz > 0 ? 1000.0 / t->refresh_hz : NAN, true,
			      figs[nf - 1].caption, "interval between flips (ms); dashed: measured period",
			      "frames (log scale)");
		if (close_checked(f, dir, figs[nf - 1].file, err) < 0)
			goto out;
	}
	f = open_in(dir, "index.html", err);
	if (!f)
		goto out;
	fputs("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n"
	      "<title>tachist report</title>\n<style>body{font-family:sans-serif;max-width:60em;"
	      "margin:2em auto;padding:0 1em}figure{margin:2em 0}img{max-width:100%}"
	      "figcaption{color:#333}</style>\n</head>\n<body>\n<h1>tachist report</h1>\n", f);
	for (size_t i = 0; i < nf; i++) {
		fputs("<figure><img src=\"", f);
		put_text(f, figs[i].file);
		fputs("\" alt=\"", f);
		put_text(f, figs[i].caption);
		fputs("\"/><figcaption>", f);
		put_text(f, figs[i].caption);
		fputs("</figcaption></figure>\n", f);
	}
	fputs("</body>\n</html>\n", f);
	if (close_checked(f, dir, "index.html", err) < 0)
		goto out;
	rc = (int)nf;
out:
	for (size_t i = 0; i < nf; i++) {
		free(figs[i].file);
		free(figs[i].caption);
	}
	free(figs);
	return rc;
}

/* Okabe–Ito colours for several lines, in the order the lines come. */
static const char *const line_colour[] = {"#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00",
					  "#56B4E9", "#000000", "#F0E442"};

void svg_lines(FILE *out, const struct svg_line *lines, size_t n, double mark, const char *title,
	       const char *xlabel, const char *ylabel)
{
	begin(out, W, H, title);
	double x0 = INFINITY, x1 = -INFINITY, y1 = 0;
	for (size_t i = 0; i < n; i++)
		for (size_t k = 0; k < lines[i].n; k++) {
			if (!isfinite(lines[i].y[k]))
				continue;
			x0 = fmin(x0, lines[i].x[k]);
			x1 = fmax(x1, lines[i].x[k]);
			y1 = fmax(y1, isfinite(lines[i].hi[k]) ? lines[i].hi[k] : lines[i].y[k]);
		}
	if (!isfinite(x0))
		x0 = 0, x1 = 1;
	if (isfinite(mark))
		y1 = fmax(y1, mark);
	if (!(y1 > 0))
		y1 = 1;
	double pad = (x1 - x0) * 0.05;
	struct frame f;
	default_frame(&f, fmax(0, x0 - pad), x1 + pad, 0, y1 * 1.05);
	axes(out, &f, xlabel, ylabel, true);
	if (isfinite(mark)) {
		fprintf(out, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"" C_GUIDE
			"\" stroke-dasharray=\"6 4\"/>\n<text x=\"%.1f\" y=\"%.1f\" fill=\"#555555\" "
			"text-anchor=\"end\">target %g</text>\n", f.px0, fy(&f, mark), f.px1,
			fy(&f, mark), f.px1 - 4, fy(&f, mark) - 4, mark);
	}
	size_t nc = sizeof line_colour / sizeof *line_colour;
	for (size_t i = 0; i < n; i++) {
		const struct svg_line *l = &lines[i];
		const char *col = line_colour[i % nc];
		/* The 5–95% range of each point as a bar, the medians joined by a line. */
		for (size_t k = 0; k < l->n; k++)
			if (isfinite(l->lo[k]) && isfinite(l->hi[k]))
				fprintf(out, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" "
					"stroke=\"%s\" stroke-opacity=\"0.5\" stroke-width=\"2\"/>\n",
					fx(&f, l->x[k]) + 3.0 * (double)i, fy(&f, l->lo[k]),
					fx(&f, l->x[k]) + 3.0 * (double)i, fy(&f, l->hi[k]), col);
		fprintf(out, "<polyline fill=\"none\" stroke=\"%s\" stroke-width=\"2\" points=\"", col);
		for (size_t k = 0; k < l->n; k++)
			if (isfinite(l->y[k]))
				fprintf(out, "%.1f,%.1f ", fx(&f, l->x[k]) + 3.0 * (double)i,
					fy(&f, l->y[k]));
		fputs("\"/>\n", out);
		for (size_t k = 0; k < l->n; k++)
			if (isfinite(l->y[k]))
				fprintf(out, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"3.5\" fill=\"%s\"/>\n",
					fx(&f, l->x[k]) + 3.0 * (double)i, fy(&f, l->y[k]), col);
		double ly = f.py1 + 14 + 18.0 * (double)i;
		fprintf(out, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"%s\" "
			"stroke-width=\"2\"/><text x=\"%.1f\" y=\"%.1f\">", f.px1 - 200, ly, f.px1 - 176,
			ly, col, f.px1 - 170, ly + 4);
		put_text(out, l->label);
		fputs("</text>\n", out);
	}
	fprintf(out, "<text x=\"%.1f\" y=\"%.1f\" font-size=\"11\" fill=\"#555555\">points: median "
		"over the simulated studies; bars: 5%% to 95%%</text>\n</svg>\n", f.px0 + 8,
		f.py1 - 6);
}
