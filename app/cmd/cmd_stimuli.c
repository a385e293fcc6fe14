/* cmd_stimuli — `tachist stimuli import | audit | controls`: tools for building, checking and
 * extending a stimulus set.
 *
 * import walks a folder tree (one subfolder per category), decodes every file to refuse what cannot
 * be shown, optionally reads level and clean source from file names, and writes a stimulus list.
 * audit streams through a list one image at a time (plus the last source image, cached), keeping
 * only a small record per row, so memory does not grow with the images' pixels; statistics across
 * the set (usual size, category z-scores, duplicates) are computed from the records afterwards.
 * controls writes, for each row with a source, a random-direction image at the same L2 budget and
 * a new list holding both. The arithmetic is in core/pixels.c, file decoding in io/image.c. */
#include <dirent.h>
#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include <cJSON.h>
#include <csv.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_statistics_double.h>

#include "cmd.h"
#include "geom.h"
#include "image.h"
#include "pixels.h"
#include "protocol_file.h"
#include "rig_file.h"
#include "stimlist_file.h"

/* Defaults, documented in README ("stimuli"). */
#define DEFAULT_SIZE_DEG 6.0      /* stimulus size assumed for the up-scaling check */
#define DEFAULT_AUDIT_TOL 0.02    /* relative budget tolerance of the audit */
#define DEFAULT_CONTROL_TOL 0.01  /* relative tolerance of a control's achieved L2 */
#define DEFAULT_NEAR_BITS 8       /* perceptual-hash bits apart that still count as near duplicates */
#define DEFAULT_Z 3.0             /* |z| above which luminance or contrast is an outlier */

static int usage_error(const char *fmt, const char *arg)
{
	fprintf(stderr, "tachist stimuli: ");
	fprintf(stderr, fmt, arg);
	fprintf(stderr, "\n");
	cmd_print_usage("stimuli", stderr);
	return EXIT_USAGE;
}

/* ---- paths ---------------------------------------------------------------------------------- */

/* The folder part of PATH ("." when none), malloc'd. */
static char *dir_of(const char *path)
{
	const char *slash = strrchr(path, '/');
	if (!slash)
		return xstrdup(".");
	if (slash == path)
		return xstrdup("/");
	char *d = xstrdup(path);
	d[slash - path] = '\0';
	return d;
}

/* TARGET relative to folder BASE, component by component; both must exist. Returns malloc'd
 * text, or a copy of TARGET when either cannot be resolved. */
static char *path_relative(const char *target, const char *base)
{
	char t[PATH_MAX], b[PATH_MAX];
	if (!realpath(target, t) || !realpath(base, b))
		return xstrdup(target);
	const char *tp = t, *bp = b;   /* each "" or "/component..." after the common part */
	if (!strcmp(b, "/"))
		bp = "";
	while (*bp) {
		const char *bs = bp + 1, *ts = tp + 1;
		size_t bl = strcspn(bs, "/"), tl = strcspn(ts, "/");
		if (!*tp || bl != tl || strncmp(bs, ts, bl))
			break;
		bp = bs + bl;
		tp = ts + tl;
	}
	size_t up = 0;
	for (const char *p = bp; *p; p++)
		up += *p == '/';
	const char *rest = *tp == '/' ? tp + 1 : tp;
	char *out = xmalloc(up * 3 + strlen(rest) + 2);
	out[0] = '\0';
	for (size_t k = 0; k < up; k++)
		strcat(out, "../");
	strcat(out, rest);
	if (!*out)
		strcpy(out, ".");
	else if (out[strlen(out) - 1] == '/')
		out[strlen(out) - 1] = '\0';
	return out;
}

static int mkdir_p(const char *path)
{
	char *p = xstrdup(path);
	for (char *s = p + 1; *s; s++) {
		if (*s != '/')
			continue;
		*s = '\0';
		if (mkdir(p, 0777) && errno != EEXIST) {
			free(p);
			return -1;
		}
		*s = '/';
	}
	int rc = mkdir(p, 0777) && errno != EEXIST ? -1 : 0;
	free(p);
	return rc;
}

/* File name without folder and extension, malloc'd. */
static char *stem_of(const char *path)
{
	const char *base = strrchr(path, '/');
	base = base ? base + 1 : path;
	char *s = xstrdup(base);
	char *dot = strrchr(s, '.');
	if (dot && dot != s)
		*dot = '\0';
	return s;
}

/* One CSV row through libcsv's writer (every field quoted, RFC 4180). */
static int csv_row(FILE *f, const char *const *cells, size_t n)
{
	for (size_t i = 0; i < n; i++) {
		if (i && fputc(',', f) == EOF)
			return -1;
		const char *c = cells[i] ? cells[i] : "";
		if (csv_fwrite(f, c, strlen(c)))
			return -1;
	}
	return fputs("\r\n", f) == EOF ? -1 : 0;
}

/* ---- import: the file-name pattern ---------------------------------------------------------- */

enum seg_kind { SEG_TEXT, SEG_LEVEL, SEG_SOURCE, SEG_ANY };
struct seg {
	enum seg_kind kind;
	char *text;
};
struct pattern {
	struct seg *v;
	size_t n;
};

static void pattern_clear(struct pattern *p)
{
	for (size_t i = 0; i < p->n; i++)
		free(p->v[i].text);
	free(p->v);
	memset(p, 0, sizeof *p);
}

static void pattern_push(struct pattern *p, enum seg_kind k, const char *text, size_t len)
{
	p->v = xrealloc(p->v, (p->n + 1) * sizeof *p->v);
	p->v[p->n].kind = k;
	p->v[p->n].text = NULL;
	if (text) {
		p->v[p->n].text = xmalloc(len + 1);
		memcpy(p->v[p->n].text, text, len);
		p->v[p->n].text[len] = '\0';
	}
	p->n++;
}

/* Parses PATTERN: literal text, `{level}`, `{source}` and `*`. Returns 0, or -1 with a reason. */
static int pattern_parse(const char *s, struct pattern *p, const char **why)
{
	memset(p, 0, sizeof *p);
	int nlevel = 0, nsource = 0;
	while (*s) {
		if (*s == '{') {
			const char *e = strchr(s, '}');
			if (!e) {
				*why = "a '{' without its '}'";
				goto fail;
			}
			size_t len = (size_t)(e - s - 1);
			if (len == 5 && !strncmp(s + 1, "level", 5)) {
				pattern_push(p, SEG_LEVEL, NULL, 0);
				nlevel++;
			} else if (len == 6 && !strncmp(s + 1, "source", 6)) {
				pattern_push(p, SEG_SOURCE, NULL, 0);
				nsource++;
			} else {
				*why = "unknown placeholder (use {level}, {source} or *)";
				goto fail;
			}
			s = e + 1;
		} else if (*s == '*') {
			pattern_push(p, SEG_ANY, NULL, 0);
			s++;
		} else {
			size_t len = strcspn(s, "{*");
			if (memchr(s, '}', len) || memchr(s, '/', len)) {
				*why = "a '}' without its '{', or a '/' (the pattern matches file names only)";
				goto fail;
			}
			pattern_push(p, SEG_TEXT, s, len);
			s += len;
		}
	}
	if (nlevel != 1) {
		*why = "the pattern needs exactly one {level}";
		goto fail;
	}
	if (nsource > 1) {
		*why = "{source} may appear once";
		goto fail;
	}
	return 0;
fail:
	pattern_clear(p);
	return -1;
}

/* True when S[0..len) is a level: [-]digits[(.|p)digits]. */
static int level_text(const char *s, size_t len, double *v)
{
	char buf[64];
	if (len == 0 || len >= sizeof buf)
		return 0;
	size_t i = 0;
	if (s[i] == '-')
		i++;
	size_t d0 = i;
	while (i < len && s[i] >= '0' && s[i] <= '9')
		i++;
	if (i == d0)
		return 0;
	if (i < len) {
		if (s[i] != '.' && s[i] != 'p')
			return 0;
		size_t f0 = ++i;
		while (i < len && s[i] >= '0' && s[i] <= '9')
			i++;
		if (i == f0 || i != len)
			return 0;
	}
	memcpy(buf, s, len);
	buf[len] = '\0';
	char *p = strchr(buf, 'p');
	if (p)
		*p = '.';
	*v = strtod(buf, NULL);
	return 1;
}

struct match {
	double level;
	const char *src;
	size_t src_len;
};

static int pattern_match_at(const struct pattern *p, size_t k, const char *s, size_t pos,
			    size_t len, struct match *m)
{
	if (k == p->n)
		return pos == len;
	const struct seg *g = &p->v[k];
	switch (g->kind) {
	case SEG_TEXT: {
		size_t tl = strlen(g->text);
		return tl <= len - pos && !memcmp(s + pos, g->text, tl) &&
		       pattern_match_at(p, k + 1, s, pos + tl, len, m);
	}
	case SEG_LEVEL:
		for (size_t e = len; e > pos; e--) {   /* longest number first */
			double v;
			if (level_text(s + pos, e - pos, &v) && pattern_match_at(p, k + 1, s, e, len, m)) {
				m->level = v;
				return 1;
			}
		}
		return 0;
	case SEG_SOURCE:
	case SEG_ANY:
		for (size_t e = pos + (g->kind == SEG_SOURCE); e <= len; e++) {   /* shortest first */
			if (pattern_match_at(p, k + 1, s, e, len, m)) {
				if (g->kind == SEG_SOURCE) {
					m->src = s + pos;
					m->src_len = e - pos;
				}
				return 1;
			}
		}
		return 0;
	}
	return 0;
}

static int pattern_match(const struct pattern *p, const char *stem, struct match *m)
{
	memset(m, 0, sizeof *m);
	return pattern_match_at(p, 0, stem, 0, strlen(stem), m);
}

/* ---- import --------------------------------------------------------------------------------- */

struct found {
	char *path;      /* as reached from DIR */
	char *category;
	char *stem;
	char *folder;
	int matched;
	double level;
	char *src_stem;  /* from {source}, NULL when none */
	int src;         /* index of the source among the found images, -1 when none */
};

struct found_list {
	struct found *v;
	size_t n;
	char **skipped;  /* messages */
	size_t nskipped;
	size_t nproblems; /* skipped files that were meant as stimuli (unreadable, unmatched source) */
};

/* Records MSG; PROBLEM says whether it makes the import exit 1. */
static void skip_note(struct found_list *fl, char *msg, int problem)
{
	fl->nproblems += problem != 0;
	fl->skipped = xrealloc(fl->skipped, (fl->nskipped + 1) * sizeof *fl->skipped);
	fl->skipped[fl->nskipped++] = msg;
}

static int cmp_str(const void *a, const void *b)
{
	return strcmp(*(char *const *)a, *(char *const *)b);
}

/* The sorted names in folder PATH (without "." and ".."), or NULL with errno set. */
static char **list_dir(const char *path, size_t *n)
{
	DIR *d = opendir(path);
	if (!d)
		return NULL;
	char **v = NULL;
	size_t k = 0;
	struct dirent *e;
	while ((e = readdir(d))) {
		if (!strcmp(e->d_name, ".") || !strcmp(e->d_name, ".."))
			continue;
		v = xrealloc(v, (k + 1) * sizeof *v);
		v[k++] = xstrdup(e->d_name);
	}
	closedir(d);
	if (k)
		qsort(v, k, sizeof *v, cmp_str);
	*n = k;
	return v ? v : xcalloc(1, sizeof *v);
}

static void free_names(char **v, size_t n)
{
	for (size_t i = 0; i < n; i++)
		free(v[i]);
	free(v);
}

static int is_dir(const char *path)
{
	struct stat st;
	return stat(path, &st) == 0 && S_ISDIR(st.st_mode);
}

/* Collects the images below FOLDER (recursively, at most DEPTH folders down, which also stops
 * symbolic-link loops) for CATEGORY. SKIP (may be NULL) is the resolved path of the list being
 * written, left out if it lies in the tree. */
static void collect(const char *folder, const char *category, int depth, const char *skip,
		    struct found_list *fl)
{
	if (depth <= 0) {
		skip_note(fl, xasprintf("%s: skipped: folders nested too deep (a link loop?)", folder), 1);
		return;
	}
	size_t n;
	char **names = list_dir(folder, &n);
	if (!names) {
		skip_note(fl, xasprintf("%s: cannot read the folder: %s", folder, strerror(errno)), 1);
		return;
	}
	for (size_t i = 0; i < n; i++) {
		char *p = xasprintf("%s/%s", folder, names[i]);
		if (names[i][0] == '.') {
			free(p);   /* hidden files and folders are not stimuli */
			continue;
		}
		if (is_dir(p)) {
			collect(p, category, depth - 1, skip, fl);
			free(p);
			continue;
		}
		char real[PATH_MAX];
		if (skip && realpath(p, real) && !strcmp(real, skip)) {
			free(p);
			continue;
		}
		struct image_info info;
		char err[1024];
		if (image_probe(p, &info, err, sizeof err)) {
			skip_note(fl, xasprintf("%s: skipped: %s", p, err), 1);
			free(p);
			continue;
		}
		fl->v = xrealloc(fl->v, (fl->n + 1) * sizeof *fl->v);
		struct found *f = &fl->v[fl->n++];
		memset(f, 0, sizeof *f);
		f->path = p;
		f->category = xstrdup(category);
		f->stem = stem_of(p);
		f->folder = dir_of(p);
		f->src = -1;
	}
	free_names(names, n);
}

/* The index of the image with stem STEM in CATEGORY, preferring folder FOLDER; -1 when none. */
static int find_source(const struct found_list *fl, const char *category, const char *folder,
		       const char *stem)
{
	int any = -1;
	for (size_t i = 0; i < fl->n; i++) {
		const struct found *f = &fl->v[i];
		if (strcmp(f->category, category) || strcmp(f->stem, stem))
			continue;
		if (!strcmp(f->folder, folder))
			return (int)i;
		if (any < 0)
			any = (int)i;
	}
	return any;
}

static int stimuli_import(int argc, char **argv)
{
	const char *dir = NULL, *out = NULL, *pat = NULL;
	for (int i = 1; i < argc; i++) {
		if (!strcmp(argv[i], "--out") && i + 1 < argc)
			out = argv[++i];
		else if (!strcmp(argv[i], "--level-from") && i + 1 < argc)
			pat = argv[++i];
		else if (argv[i][0] == '-')
			return usage_error("import: unknown or incomplete option '%s'", argv[i]);
		else if (!dir)
			dir = argv[i];
		else
			return usage_error("import: more than one folder ('%s')", argv[i]);
	}
	if (!dir || !out)
		return usage_error("import needs a folder and --out LIST.csv%s", "");
	struct pattern pt = {0};
	const char *why = NULL;
	if (pat && pattern_parse(pat, &pt, &why)) {
		fprintf(stderr, "tachist stimuli import: --level-from '%s': %s\n", pat, why);
		return EXIT_USAGE;
	}
	if (!is_dir(dir)) {
		fprintf(stderr, "tachist stimuli import: %s is not a folder\n", dir);
		pattern_clear(&pt);
		return EXIT_PROBLEMS;
	}
	struct found_list fl = {0};
	char out_real[PATH_MAX];
	if (!realpath(out, out_real))
		out_real[0] = '\0';
	size_t n;
	char **top = list_dir(dir, &n);
	for (size_t i = 0; top && i < n; i++) {
		if (top[i][0] == '.')
			continue;
		char *p = xasprintf("%s/%s", dir, top[i]);
		if (is_dir(p))
			collect(p, top[i], 32, out_real[0] ? out_real : NULL, &fl);
		else
			skip_note(&fl, xasprintf("%s: ignored: not inside a category folder", p), 0);
		free(p);
	}
	free_names(top, n);

	size_t unmatched = 0;
	if (pat) {
		for (size_t i = 0; i < fl.n; i++) {
			struct found *f = &fl.v[i];
			struct match m;
			if (!pattern_match(&pt, f->stem, &m)) {
				unmatched++;
				continue;
			}
			f->matched = 1;
			f->level = m.level;
			if (m.src) {
				f->src_stem = xmalloc(m.src_len + 1);
				memcpy(f->src_stem, m.src, m.src_len);
				f->src_stem[m.src_len] = '\0';
				f->src = find_source(&fl, f->category, f->folder, f->src_stem);
				if (f->src < 0 || f->src == (int)i) {
					f->src = -1;
					skip_note(&fl, xasprintf("%s: no clean source named '%s' in category "
								 "'%s'; listed without a source", f->path,
								 f->src_stem, f->category), 1);
				}
			}
		}
	}

	int rc = EXIT_OK;
	FILE *fo = NULL;
	char *outdir = dir_of(out);
	if (!fl.n) {
		fprintf(stderr, "tachist stimuli import: no readable images in category folders under %s\n",
			dir);
		rc = EXIT_PROBLEMS;
		goto report;
	}
	fo = fopen(out, "w");
	if (!fo) {
		fprintf(stderr, "tachist stimuli import: cannot write %s: %s\n", out, strerror(errno));
		rc = EXIT_PROBLEMS;
		goto report;
	}
	const char *head[] = {"image", "category", "level", "source"};
	int ok = csv_row(fo, head, pat ? 4 : 2) == 0;
	size_t ncat = 0;
	for (size_t i = 0; i < fl.n && ok; i++) {
		struct found *f = &fl.v[i];
		if (!i || strcmp(f->category, fl.v[i - 1].category))
			ncat++;
		char *img = path_relative(f->path, outdir);
		char *src = f->src >= 0 ? path_relative(fl.v[f->src].path, outdir) : NULL;
		char lev[64];
		snprintf(lev, sizeof lev, "%.17g", f->matched ? f->level : 0.0);
		const char *cells[] = {img, f->category, lev, src ? src : ""};
		ok = csv_row(fo, cells, pat ? 4 : 2) == 0;
		free(img);
		free(src);
	}
	if (fclose(fo) || !ok) {
		fprintf(stderr, "tachist stimuli import: cannot write %s: %s\n", out, strerror(errno));
		rc = EXIT_PROBLEMS;
		goto report;
	}
	printf("wrote %s: %zu images in %zu categor%s\n", out, fl.n, ncat, ncat == 1 ? "y" : "ies");
	if (pat)
		printf("  %zu names matched '%s'; %zu did not and are listed as clean images (level 0, "
		       "no source)\n", fl.n - unmatched, pat, unmatched);
report:
	if (fl.nskipped) {
		printf("%zu note%s (%zu problem%s):\n", fl.nskipped, fl.nskipped == 1 ? "" : "s",
		       fl.nproblems, fl.nproblems == 1 ? "" : "s");
		for (size_t i = 0; i < fl.nskipped; i++)
			printf("  %s\n", fl.skipped[i]);
	}
	if (fl.nproblems && rc == EXIT_OK)
		rc = EXIT_PROBLEMS;
	for (size_t i = 0; i < fl.n; i++) {
		free(fl.v[i].path);
		free(fl.v[i].category);
		free(fl.v[i].stem);
		free(fl.v[i].folder);
		free(fl.v[i].src_stem);
	}
	free(fl.v);
	for (size_t i = 0; i < fl.nskipped; i++)
		free(fl.skipped[i]);
	free(fl.skipped);
	free(outdir);
	pattern_clear(&pt);
	return rc;
}

/* ---- shared by audit and controls ----------------------------------------------------------- */

/* One decoded source image kept between rows, since the perturbed versions of one source usually
 * follow each other in a list. */
struct src_cache {
	char *path;
	int ok;
	struct image img;
	struct image_info info;
	char err[1024];
};

static const struct src_cache *src_get(struct src_cache *c, const char *path)
{
	if (c->path && !strcmp(c->path, path))
		return c;
	free(c->path);
	image_free(&c->img);
	c->path = xstrdup(path);
	c->ok = image_load(path, &c->img, &c->info, c->err, sizeof c->err) == 0;
	return c;
}

/* Hands IMG (decoded from PATH) to the cache, which then owns it: a list usually names a clean
 * image on one row and uses it as the source of the rows that follow. */
static void src_put(struct src_cache *c, const char *path, struct image *img,
		    const struct image_info *info)
{
	free(c->path);
	image_free(&c->img);
	c->path = xstrdup(path);
	c->ok = 1;
	c->img = *img;
	c->info = *info;
	memset(img, 0, sizeof *img);
}

static void src_clear(struct src_cache *c)
{
	free(c->path);
	image_free(&c->img);
	memset(c, 0, sizeof *c);
}

/* Colour channels over which two images are compared: 1 when both files store grey, else 3. */
static int colour_channels(const struct image_info *a, const struct image_info *b)
{
	return a->channels <= 2 && b->channels <= 2 ? 1 : 3;
}

static int parse_units(const char *s, double *scale)
{
	if (!strcmp(s, "unit"))
		*scale = 1.0;
	else if (!strcmp(s, "255"))
		*scale = 255.0;
	else
		return -1;
	return 0;
}

/* ---- audit ---------------------------------------------------------------------------------- */

enum flag_kind { FL_UNREADABLE, FL_SIZE, FL_UPSCALE, FL_TRANSLUCENT, FL_LUMINANCE, FL_CONTRAST,
		 FL_DUPLICATE, FL_NEAR, FL_BUDGET, FL_SOURCE_SIZE, FL_SOURCE_MISSING, FL_COUNT };
static const char *const flag_names[FL_COUNT] = {
	"unreadable", "size", "upscaled", "translucent", "luminance", "contrast", "duplicate",
	"near-duplicate", "budget", "source-size", "source-missing"};

/* What the audit keeps per row: no pixels. */
struct arec {
	int ok;
	struct image_info info;
	double lum, rms, zlum, zrms;
	int translucent;
	char sha[65];
	uint64_t phash;
	int src_state;      /* 0 no source, 1 measured, 2 missing or unreadable, 3 size mismatch */
	double l2, linf;    /* [0, 1] units, when measured */
	unsigned flags;     /* bit per flag_kind */
};

struct flag {
	size_t row;
	enum flag_kind kind;
	char *msg;
};

/* One category: images, readable ones, mean and sample SD of luminance (l) and contrast (c). */
struct catsum {
	const char *name;
	size_t n, nok;
	double ml, sl, mc, sc;
};

struct audit {
	const struct stimlist *l;
	struct arec *r;
	struct flag *f;
	size_t nf;
	/* options */
	double units, tol, size_deg, zmax;
	int near_bits, norm_linf;
	/* rig */
	int have_rig, stim_px;
	double stim_deg_actual;
	char *rig_path;
	int usual_w, usual_h;
	struct catsum *cs;  /* categories, filled by audit_set */
	size_t ncs;
};

static size_t category_summaries(const struct audit *a, struct catsum **out);

static void add_flag(struct audit *a, size_t row, enum flag_kind k, char *msg)
{
	a->f = xrealloc(a->f, (a->nf + 1) * sizeof *a->f);
	a->f[a->nf].row = row;
	a->f[a->nf].kind = k;
	a->f[a->nf].msg = msg;
	a->nf++;
	a->r[row].flags |= 1u << k;
}

static void audit_row(struct audit *a, size_t i, struct src_cache *cache)
{
	const struct stim *s = &a->l->items[i];
	struct arec *r = &a->r[i];
	struct image img;
	char err[1024];
	if (image_load(s->path, &img, &r->info, err, sizeof err)) {
		add_flag(a, i, FL_UNREADABLE, xasprintf("%s", err));
		return;
	}
	r->ok = 1;
	size_t npix = (size_t)img.width * (size_t)img.height;
	struct pixels_stats st;
	pixels_stats(img.rgba, npix, &st);
	r->lum = st.mean_lum;
	r->rms = st.rms_contrast;
	r->translucent = st.translucent;
	pixels_content_hash(img.rgba, img.width, img.height, r->sha);
	r->phash = pixels_phash(img.rgba, img.width, img.height);
	if (st.translucent)
		add_flag(a, i, FL_TRANSLUCENT, xasprintf("%s has transparent pixels: what is shown "
			 "depends on the background, and luminance here ignores alpha", s->image));
	if (s->source_path) {
		const struct src_cache *c = src_get(cache, s->source_path);
		if (!c->ok) {
			r->src_state = 2;
			add_flag(a, i, FL_SOURCE_MISSING, xasprintf("source of %s: %s", s->image, c->err));
		} else if (c->img.width != img.width || c->img.height != img.height) {
			r->src_state = 3;
			add_flag(a, i, FL_SOURCE_SIZE, xasprintf("%s is %dx%d but its source %s is %dx%d",
				 s->image, img.width, img.height, s->source, c->img.width, c->img.height));
		} else {
			struct pixels_dist d;
			pixels_distance(img.rgba, c->img.rgba, npix, colour_channels(&r->info, &c->info), &d);
			r->src_state = 1;
			r->l2 = d.l2;
			r->linf = d.linf;
			if (s->has_level) {
				double got = (a->norm_linf ? d.linf : d.l2) * a->units;
				/* One 8-bit step as an absolute floor, so a level of 0 allows no change
				 * beyond rounding and tiny budgets are not judged on quantisation. */
				double allow = a->tol * fabs(s->level) + a->units / 255.0;
				if (fabs(got - s->level) > allow)
					add_flag(a, i, FL_BUDGET, xasprintf("%s: measured %s %.6g differs from "
						 "the declared level %.6g by more than %.6g", s->image,
						 a->norm_linf ? "Linf" : "L2", got, s->level, allow));
			}
		}
	}
	const struct stim *next = i + 1 < a->l->n ? &a->l->items[i + 1] : NULL;
	if (next && next->source_path && !strcmp(next->source_path, s->path))
		src_put(cache, s->path, &img, &r->info);
	else
		image_free(&img);
}

/* Orders row records by content hash, then by position, for finding exact duplicates by sorting
 * instead of comparing every pair. */
static int cmp_rec_sha(const void *x, const void *y)
{
	const struct arec *a = *(const struct arec *const *)x, *b = *(const struct arec *const *)y;
	int c = strcmp(a->sha, b->sha);
	return c ? c : (a > b) - (a < b);
}

/* True when rows I and J are tied through a source (one is the other's source, or both share
 * one): their likeness is by design and is checked as a budget instead. */
static int related(const struct stimlist *l, size_t i, size_t j)
{
	const struct stim *a = &l->items[i], *b = &l->items[j];
	if (a->source_path && b->source_path && !strcmp(a->source_path, b->source_path))
		return 1;
	if (a->source_path && !strcmp(a->source_path, b->path))
		return 1;
	if (b->source_path && !strcmp(b->source_path, a->path))
		return 1;
	return 0;
}

struct pair {
	size_t a, b;
	int bits;   /* -1 for exact duplicates */
};

static void audit_set(struct audit *a, struct pair **pairs, size_t *npairs)
{
	const struct stimlist *l = a->l;
	size_t n = l->n;
	/* Usual size: the most frequent width × height. */
	size_t best = 0;
	for (size_t i = 0; i < n; i++) {
		if (!a->r[i].ok)
			continue;
		size_t k = 0;
		for (size_t j = 0; j < n; j++)
			k += a->r[j].ok && a->r[j].info.width == a->r[i].info.width &&
			     a->r[j].info.height == a->r[i].info.height;
		if (k > best) {
			best = k;
			a->usual_w = a->r[i].info.width;
			a->usual_h = a->r[i].info.height;
		}
		if (k * 2 > n)
			break;   /* a majority cannot be beaten */
	}
	for (size_t i = 0; i < n; i++) {
		const struct arec *r = &a->r[i];
		if (!r->ok)
			continue;
		if (r->info.width != a->usual_w || r->info.height != a->usual_h)
			add_flag(a, i, FL_SIZE, xasprintf("%s is %dx%d; most of the set is %dx%d",
				 l->items[i].image, r->info.width, r->info.height, a->usual_w, a->usual_h));
		int longer = r->info.width > r->info.height ? r->info.width : r->info.height;
		if (a->have_rig && longer < a->stim_px)
			add_flag(a, i, FL_UPSCALE, xasprintf("%s would be scaled up from %d to %d px to "
				 "span %.3g deg on the rig", l->items[i].image, longer, a->stim_px,
				 a->stim_deg_actual));
	}
	/* Category z-scores of luminance and contrast (sample SD). */
	a->ncs = category_summaries(a, &a->cs);
	for (size_t j = 0; j < n; j++) {
		struct arec *r = &a->r[j];
		const char *cat = l->items[j].category;
		size_t c = 0;
		while (strcmp(a->cs[c].name, cat))
			c++;
		const struct catsum *cs = &a->cs[c];
		if (!r->ok || cs->nok < 2)
			continue;
		r->zlum = cs->sl > 0 ? (r->lum - cs->ml) / cs->sl : 0;
		r->zrms = cs->sc > 0 ? (r->rms - cs->mc) / cs->sc : 0;
		if (fabs(r->zlum) > a->zmax)
			add_flag(a, j, FL_LUMINANCE, xasprintf("%s: mean luminance %.4f is %+.2f SD from "
				 "its category '%s' (mean %.4f, SD %.4f)", l->items[j].image, r->lum,
				 r->zlum, cat, cs->ml, cs->sl));
		if (fabs(r->zrms) > a->zmax)
			add_flag(a, j, FL_CONTRAST, xasprintf("%s: RMS contrast %.4f is %+.2f SD from "
				 "its category '%s' (mean %.4f, SD %.4f)", l->items[j].image, r->rms,
				 r->zrms, cat, cs->mc, cs->sc));
	}
	/* Exact duplicates: equal content hashes, found by sorting. */
	const struct arec **idx = xmalloc((n ? n : 1) * sizeof *idx);
	size_t m = 0;
	for (size_t i = 0; i < n; i++)
		if (a->r[i].ok)
			idx[m++] = &a->r[i];
	qsort(idx, m, sizeof *idx, cmp_rec_sha);
	for (size_t s = 0; s < m;) {
		size_t e = s + 1;
		while (e < m && !strcmp(idx[s]->sha, idx[e]->sha))
			e++;
		for (size_t x = s; x < e; x++)
			for (size_t y = x + 1; y < e; y++) {
				size_t i = (size_t)(idx[x] - a->r), j = (size_t)(idx[y] - a->r);
				if (related(l, i, j))
					continue;
				*pairs = xrealloc(*pairs, (*npairs + 1) * sizeof **pairs);
				(*pairs)[(*npairs)++] = (struct pair){i, j, -1};
				add_flag(a, j, FL_DUPLICATE, xasprintf("%s has the same pixels as %s "
					 "(line %d)", l->items[j].image, l->items[i].image, l->items[i].line));
			}
		s = e;
	}
	free(idx);
	/* Near duplicates: perceptual hashes within near_bits, every pair. */
	for (size_t i = 0; i < n; i++) {
		if (!a->r[i].ok)
			continue;
		for (size_t j = i + 1; j < n; j++) {
			if (!a->r[j].ok || !strcmp(a->r[i].sha, a->r[j].sha))
				continue;
			int bits = pixels_hamming(a->r[i].phash, a->r[j].phash);
			if (bits > a->near_bits || related(l, i, j))
				continue;
			*pairs = xrealloc(*pairs, (*npairs + 1) * sizeof **pairs);
			(*pairs)[(*npairs)++] = (struct pair){i, j, bits};
			add_flag(a, j, FL_NEAR, xasprintf("%s looks like %s (line %d): perceptual hashes "
				 "%d bits apart", l->items[j].image, l->items[i].image, l->items[i].line, bits));
		}
	}
}

static int cmp_flag(const void *x, const void *y)
{
	const struct flag *a = x, *b = y;
	if (a->row != b->row)
		return (a->row > b->row) - (a->row < b->row);
	return (a->kind > b->kind) - (a->kind < b->kind);
}

static cJSON *num_or_null(int have, double v)
{
	return have && isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull();
}

/* Category summaries, in order of first appearance; *OUT is malloc'd. */
static size_t category_summaries(const struct audit *a, struct catsum **out)
{
	const struct stimlist *l = a->l;
	struct catsum *v = NULL;
	size_t k = 0;
	double *lv = xmalloc((l->n ? l->n : 1) * sizeof *lv), *cv = xmalloc((l->n ? l->n : 1) * sizeof *cv);
	for (size_t i = 0; i < l->n; i++) {
		const char *cat = l->items[i].category;
		size_t c;
		for (c = 0; c < k && strcmp(v[c].name, cat); c++)
			;
		if (c < k)
			continue;
		v = xrealloc(v, (k + 1) * sizeof *v);
		struct catsum *s = &v[k++];
		memset(s, 0, sizeof *s);
		s->name = cat;
		for (size_t j = i; j < l->n; j++) {
			if (strcmp(l->items[j].category, cat))
				continue;
			s->n++;
			if (!a->r[j].ok)
				continue;
			lv[s->nok] = a->r[j].lum;
			cv[s->nok] = a->r[j].rms;
			s->nok++;
		}
		s->ml = s->mc = s->sl = s->sc = NAN;
		if (s->nok) {
			s->ml = gsl_stats_mean(lv, 1, s->nok);
			s->mc = gsl_stats_mean(cv, 1, s->nok);
		}
		if (s->nok > 1) {
			s->sl = gsl_stats_sd_m(lv, 1, s->nok, s->ml);
			s->sc = gsl_stats_sd_m(cv, 1, s->nok, s->mc);
		}
	}
	free(lv);
	free(cv);
	*out = v;
	return k;
}

static void print_json(const struct audit *a, const char *list_path, const struct pair *pairs,
		       size_t npairs)
{
	const struct stimlist *l = a->l;
	cJSON *root = cJSON_CreateObject();
	cJSON_AddStringToObject(root, "list", list_path);
	cJSON_AddNumberToObject(root, "images", (double)l->n);
	cJSON_AddStringToObject(root, "units", a->units == 255.0 ? "255" : "unit");
	cJSON_AddStringToObject(root, "level_norm", a->norm_linf ? "linf" : "l2");
	cJSON_AddNumberToObject(root, "usual_width", a->usual_w);
	cJSON_AddNumberToObject(root, "usual_height", a->usual_h);
	if (a->have_rig) {
		cJSON_AddStringToObject(root, "rig", a->rig_path);
		cJSON_AddNumberToObject(root, "size_deg", a->size_deg);
		cJSON_AddNumberToObject(root, "stimulus_px", a->stim_px);
	} else {
		cJSON_AddNullToObject(root, "rig");
	}
	cJSON *rows = cJSON_AddArrayToObject(root, "rows");
	for (size_t i = 0; i < l->n; i++) {
		const struct stim *s = &l->items[i];
		const struct arec *r = &a->r[i];
		cJSON *o = cJSON_CreateObject();
		cJSON_AddNumberToObject(o, "line", s->line);
		cJSON_AddStringToObject(o, "image", s->image);
		cJSON_AddStringToObject(o, "category", s->category);
		cJSON_AddItemToObject(o, "level", num_or_null(s->has_level, s->level));
		if (s->source)
			cJSON_AddStringToObject(o, "source", s->source);
		else
			cJSON_AddNullToObject(o, "source");
		cJSON_AddBoolToObject(o, "readable", r->ok);
		if (r->ok) {
			char ph[17];
			snprintf(ph, sizeof ph, "%016llx", (unsigned long long)r->phash);
			cJSON_AddNumberToObject(o, "width", r->info.width);
			cJSON_AddNumberToObject(o, "height", r->info.height);
			cJSON_AddNumberToObject(o, "channels", r->info.channels);
			cJSON_AddNumberToObject(o, "bits", r->info.bits);
			cJSON_AddBoolToObject(o, "alpha", r->info.alpha);
			cJSON_AddStringToObject(o, "format", r->info.format);
			cJSON_AddNumberToObject(o, "mean_luminance", r->lum);
			cJSON_AddNumberToObject(o, "rms_contrast", r->rms);
			cJSON_AddNumberToObject(o, "z_luminance", r->zlum);
			cJSON_AddNumberToObject(o, "z_contrast", r->zrms);
			cJSON_AddStringToObject(o, "sha256", r->sha);
			cJSON_AddStringToObject(o, "phash", ph);
		}
		cJSON_AddItemToObject(o, "l2", num_or_null(r->src_state == 1, r->l2 * a->units));
		cJSON_AddItemToObject(o, "linf", num_or_null(r->src_state == 1, r->linf * a->units));
		cJSON *fl = cJSON_AddArrayToObject(o, "flags");
		for (int k = 0; k < FL_COUNT; k++)
			if (r->flags & (1u << k))
				cJSON_AddItemToArray(fl, cJSON_CreateString(flag_names[k]));
		cJSON_AddItemToArray(rows, o);
	}
	const struct catsum *cs = a->cs;
	size_t nc = a->ncs;
	cJSON *cats = cJSON_AddArrayToObject(root, "categories");
	for (size_t c = 0; c < nc; c++) {
		cJSON *o = cJSON_CreateObject();
		cJSON_AddStringToObject(o, "category", cs[c].name);
		cJSON_AddNumberToObject(o, "images", (double)cs[c].n);
		cJSON_AddItemToObject(o, "luminance_mean", num_or_null(1, cs[c].ml));
		cJSON_AddItemToObject(o, "luminance_sd", num_or_null(1, cs[c].sl));
		cJSON_AddItemToObject(o, "contrast_mean", num_or_null(1, cs[c].mc));
		cJSON_AddItemToObject(o, "contrast_sd", num_or_null(1, cs[c].sc));
		cJSON_AddItemToArray(cats, o);
	}
	cJSON *dups = cJSON_AddArrayToObject(root, "duplicates");
	for (size_t p = 0; p < npairs; p++) {
		cJSON *o = cJSON_CreateObject();
		cJSON_AddStringToObject(o, "kind", pairs[p].bits < 0 ? "exact" : "near");
		cJSON_AddStringToObject(o, "a", l->items[pairs[p].a].image);
		cJSON_AddStringToObject(o, "b", l->items[pairs[p].b].image);
		if (pairs[p].bits >= 0)
			cJSON_AddNumberToObject(o, "bits", pairs[p].bits);
		cJSON_AddItemToArray(dups, o);
	}
	cJSON *flags = cJSON_AddArrayToObject(root, "flags");
	for (size_t k = 0; k < a->nf; k++) {
		cJSON *o = cJSON_CreateObject();
		cJSON_AddNumberToObject(o, "line", l->items[a->f[k].row].line);
		cJSON_AddStringToObject(o, "image", l->items[a->f[k].row].image);
		cJSON_AddStringToObject(o, "kind", flag_names[a->f[k].kind]);
		cJSON_AddStringToObject(o, "message", a->f[k].msg);
		cJSON_AddItemToArray(flags, o);
	}
	char *txt = cJSON_Print(root);
	puts(txt);
	free(txt);
	cJSON_Delete(root);
}

static void print_text(const struct audit *a, const char *list_path)
{
	const struct stimlist *l = a->l;
	const char *u = a->units == 255.0 ? " (0-255)" : "";
	printf("%s: %zu images, usual size %dx%d", list_path, l->n, a->usual_w, a->usual_h);
	if (a->have_rig)
		printf("; at %.3g deg the rig shows %d px (%s)", a->size_deg, a->stim_px, a->rig_path);
	printf("\n\nimages\n");
	printf("  %5s  %-32s %-12s %9s %2s %2s %7s %7s %6s %6s %10s %10s %8s\n", "line", "image",
	       "category", "size", "ch", "b", "lum", "rms", "z lum", "z rms", "L2", "Linf", "level");
	for (size_t i = 0; i < l->n; i++) {
		const struct stim *s = &l->items[i];
		const struct arec *r = &a->r[i];
		char size[24] = "-", l2[24] = "", linf[24] = "", lev[24] = "";
		if (r->ok)
			snprintf(size, sizeof size, "%dx%d", r->info.width, r->info.height);
		if (r->src_state == 1) {
			snprintf(l2, sizeof l2, "%.5g", r->l2 * a->units);
			snprintf(linf, sizeof linf, "%.5g", r->linf * a->units);
		}
		if (s->has_level)
			snprintf(lev, sizeof lev, "%g", s->level);
		if (r->ok)
			printf("  %5d  %-32s %-12s %9s %2d %2d %7.4f %7.4f %+6.2f %+6.2f %10s %10s %8s%s\n",
			       s->line, s->image, s->category, size, r->info.channels, r->info.bits,
			       r->lum, r->rms, r->zlum, r->zrms, l2, linf, lev, r->flags ? "  !" : "");
		else
			printf("  %5d  %-32s %-12s %9s  (unreadable)\n", s->line, s->image, s->category,
			       size);
	}
	const struct catsum *cs = a->cs;
	size_t nc = a->ncs;
	printf("\ncategories (luminance: mean relative luminance; contrast: RMS)\n");
	printf("  %-16s %6s %10s %10s %10s %10s\n", "category", "images", "lum mean", "lum SD",
	       "rms mean", "rms SD");
	for (size_t c = 0; c < nc; c++)
		printf("  %-16s %6zu %10.4f %10.4f %10.4f %10.4f\n", cs[c].name, cs[c].n, cs[c].ml,
		       cs[c].sl, cs[c].mc, cs[c].sc);
	printf("\nL2 and Linf against each row's source, over all pixels and channels%s\n", u);
	if (!a->nf) {
		printf("\nnothing flagged\n");
		return;
	}
	printf("\n%zu flag%s\n", a->nf, a->nf == 1 ? "" : "s");
	for (size_t k = 0; k < a->nf; k++)
		printf("%s:%d: %s: %s\n", list_path, l->items[a->f[k].row].line,
		       flag_names[a->f[k].kind], a->f[k].msg);
}

static int stimuli_audit(int argc, char **argv)
{
	const char *list = NULL, *rigp = NULL, *protop = NULL;
	int json = 0, have_size = 0;
	struct audit a = {0};
	a.units = 1.0;
	a.tol = DEFAULT_AUDIT_TOL;
	a.size_deg = DEFAULT_SIZE_DEG;
	a.zmax = DEFAULT_Z;
	a.near_bits = DEFAULT_NEAR_BITS;
	for (int i = 1; i < argc; i++) {
		const char *o = argv[i], *v = i + 1 < argc ? argv[i + 1] : NULL;
		unsigned long long u;
		if (!strcmp(o, "--json")) {
			json = 1;
		} else if (!strcmp(o, "--rig") && v) {
			rigp = v;
			i++;
		} else if (!strcmp(o, "--size-deg") && v) {
			if (cmd_parse_double(v, &a.size_deg) || a.size_deg <= 0 || a.size_deg >= 180)
				return usage_error("--size-deg wants degrees in (0, 180), not '%s'", v);
			have_size = 1;
			i++;
		} else if (!strcmp(o, "--protocol") && v) {
			protop = v;
			i++;
		} else if (!strcmp(o, "--units") && v) {
			if (parse_units(v, &a.units))
				return usage_error("--units is 'unit' or '255', not '%s'", v);
			i++;
		} else if (!strcmp(o, "--norm") && v) {
			if (strcmp(v, "l2") && strcmp(v, "linf"))
				return usage_error("--norm is 'l2' or 'linf', not '%s'", v);
			a.norm_linf = !strcmp(v, "linf");
			i++;
		} else if (!strcmp(o, "--tolerance") && v) {
			if (cmd_parse_double(v, &a.tol) || a.tol < 0 || a.tol >= 1)
				return usage_error("--tolerance wants a fraction in [0, 1), not '%s'", v);
			i++;
		} else if (!strcmp(o, "--near-bits") && v) {
			if (cmd_parse_u64(v, &u) || u > 64)
				return usage_error("--near-bits wants 0 to 64, not '%s'", v);
			a.near_bits = (int)u;
			i++;
		} else if (o[0] == '-') {
			return usage_error("audit: unknown or incomplete option '%s'", o);
		} else if (!list) {
			list = o;
		} else {
			return usage_error("audit: more than one list ('%s')", o);
		}
	}
	if (!list)
		return usage_error("audit needs a stimulus list%s", "");
	if (protop && have_size)
		return usage_error("give --size-deg or --protocol, not both%s", "");

	struct diag_list d;
	diag_init(&d);
	/* With a protocol: its stimulus size, and the list's categories checked against its choices. */
	struct protocol proto;
	memset(&proto, 0, sizeof proto);
	if (protop) {
		if (protocol_load(protop, &proto, &d)) {
			cmd_print_diags(&d, stderr);
			diag_clear(&d);
			protocol_clear(&proto);
			return EXIT_PROBLEMS;
		}
		a.size_deg = proto.size_deg;
		diag_clear(&d);
	}
	struct stimlist l = {0};
	int lrc = stimlist_load(list, protop ? &proto : NULL, &l, &d);
	protocol_clear(&proto);
	if (lrc) {
		cmd_print_diags(&d, stderr);
		diag_clear(&d);
		stimlist_clear(&l);
		return EXIT_PROBLEMS;
	}
	cmd_print_diags(&d, stderr);   /* warnings */
	diag_clear(&d);

	a.l = &l;
	a.rig_path = cmd_rig_path(rigp);
	struct rig rig = {0};
	if (a.rig_path) {
		if (rig_load(a.rig_path, &rig, &d)) {
			cmd_print_diags(&d, stderr);
			diag_clear(&d);
			free(a.rig_path);
			stimlist_clear(&l);
			return EXIT_PROBLEMS;
		}
		diag_clear(&d);
		a.have_rig = 1;
		a.stim_px = geom_deg_to_px(&rig, a.size_deg, &a.stim_deg_actual);
	} else {
		fprintf(stderr, "tachist stimuli audit: no rig profile; the up-scaling check is skipped\n");
	}
	a.r = xcalloc(l.n ? l.n : 1, sizeof *a.r);
	struct src_cache cache = {0};
	for (size_t i = 0; i < l.n; i++)
		audit_row(&a, i, &cache);
	src_clear(&cache);
	struct pair *pairs = NULL;
	size_t npairs = 0;
	audit_set(&a, &pairs, &npairs);
	if (a.nf)
		qsort(a.f, a.nf, sizeof *a.f, cmp_flag);
	if (json)
		print_json(&a, list, pairs, npairs);
	else
		print_text(&a, list);
	int rc = a.nf ? EXIT_PROBLEMS : EXIT_OK;
	for (size_t k = 0; k < a.nf; k++)
		free(a.f[k].msg);
	free(a.f);
	free(a.r);
	free(a.cs);
	free(pairs);
	free(a.rig_path);
	rig_clear(&rig);
	stimlist_clear(&l);
	return rc;
}

/* ---- controls ------------------------------------------------------------------------------- */

/* A seed for one row from the run's seed and the row's image name, so a control does not change
 * when other rows are added, removed or reordered (FNV-1a over the name, mixed with the seed). */
static unsigned long row_seed(unsigned long long seed, const char *image)
{
	uint64_t h = 1469598103934665603ull ^ seed;
	for (const unsigned char *p = (const unsigned char *)image; *p; p++)
		h = (h ^ *p) * 1099511628211ull;
	h ^= h >> 33;
	return (unsigned long)(h & 0xffffffffUL);
}

static int stimuli_controls(int argc, char **argv)
{
	const char *list = NULL, *outdir = NULL;
	unsigned long long seed = 1;
	double tol = DEFAULT_CONTROL_TOL, units = 1.0;
	int from_level = 0;
	for (int i = 1; i < argc; i++) {
		const char *o = argv[i], *v = i + 1 < argc ? argv[i + 1] : NULL;
		if (!strcmp(o, "--out") && v) {
			outdir = v;
			i++;
		} else if (!strcmp(o, "--seed") && v) {
			if (cmd_parse_u64(v, &seed))
				return usage_error("--seed wants a whole number, not '%s'", v);
			i++;
		} else if (!strcmp(o, "--tolerance") && v) {
			if (cmd_parse_double(v, &tol) || tol <= 0 || tol >= 1)
				return usage_error("--tolerance wants a fraction in (0, 1), not '%s'", v);
			i++;
		} else if (!strcmp(o, "--budget") && v) {
			if (strcmp(v, "measured") && strcmp(v, "level"))
				return usage_error("--budget is 'measured' or 'level', not '%s'", v);
			from_level = !strcmp(v, "level");
			i++;
		} else if (!strcmp(o, "--units") && v) {
			if (parse_units(v, &units))
				return usage_error("--units is 'unit' or '255', not '%s'", v);
			i++;
		} else if (o[0] == '-') {
			return usage_error("controls: unknown or incomplete option '%s'", o);
		} else if (!list) {
			list = o;
		} else {
			return usage_error("controls: more than one list ('%s')", o);
		}
	}
	if (!list || !outdir)
		return usage_error("controls needs a stimulus list and --out DIR%s", "");

	struct diag_list d;
	diag_init(&d);
	struct stimlist l = {0};
	if (stimlist_load(list, NULL, &l, &d)) {
		cmd_print_diags(&d, stderr);
		diag_clear(&d);
		stimlist_clear(&l);
		return EXIT_PROBLEMS;
	}
	cmd_print_diags(&d, stderr);
	diag_clear(&d);
	for (size_t k = 0; k < l.nlabels; k++)
		if (!strcmp(l.label_names[k], "control") || !strcmp(l.label_names[k], "l2_achieved")) {
			fprintf(stderr, "tachist stimuli controls: %s already has a '%s' column\n", list,
				l.label_names[k]);
			stimlist_clear(&l);
			return EXIT_PROBLEMS;
		}
	if (mkdir_p(outdir)) {
		fprintf(stderr, "tachist stimuli controls: cannot create %s: %s\n", outdir, strerror(errno));
		stimlist_clear(&l);
		return EXIT_PROBLEMS;
	}
	char *listout = xasprintf("%s/controls.csv", outdir);
	FILE *fo = fopen(listout, "w");
	if (!fo) {
		fprintf(stderr, "tachist stimuli controls: cannot write %s: %s\n", listout, strerror(errno));
		free(listout);
		stimlist_clear(&l);
		return EXIT_PROBLEMS;
	}
	/* Columns: image, category, [level,] source, labels..., control, l2_achieved. The level
	 * column is left out when the list has none, since the list format wants no empty levels. */
	size_t lc = l.has_level_column ? 1 : 0, ncol = 3 + lc + l.nlabels + 2;
	size_t c_src = 2 + lc, c_lab = 3 + lc, c_ctl = c_lab + l.nlabels, c_l2 = c_ctl + 1;
	const char **cells = xcalloc(ncol, sizeof *cells);
	cells[0] = "image"; cells[1] = "category"; cells[2] = "level"; cells[c_src] = "source";
	for (size_t k = 0; k < l.nlabels; k++)
		cells[c_lab + k] = l.label_names[k];
	cells[c_ctl] = "control";
	cells[c_l2] = "l2_achieved";
	int wok = csv_row(fo, cells, ncol) == 0;

	gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
	struct src_cache cache = {0};
	char **used = NULL;   /* control file names written, to keep them apart */
	size_t nused = 0, nmade = 0, nfail = 0, nsource = 0;
	printf("%-36s %-40s %10s %10s %8s %8s\n", "image", "control", "budget", "achieved", "error",
	       "clipped");
	for (size_t i = 0; i < l.n && wok; i++) {
		const struct stim *s = &l.items[i];
		char lev[64] = "", l2o[64] = "NA";
		if (s->has_level)
			snprintf(lev, sizeof lev, "%.17g", s->level);
		char *img_rel = path_relative(s->path, outdir);
		char *src_rel = s->source_path ? path_relative(s->source_path, outdir) : NULL;
		/* The original row, with its own measured L2 (0 for a clean image). */
		const struct src_cache *c = NULL;
		struct image img = {0};
		struct image_info info;
		char err[1024];
		int have_img = image_load(s->path, &img, &info, err, sizeof err) == 0;
		double budget = NAN;
		int chans = 3;
		if (!s->source_path) {
			if (have_img)
				snprintf(l2o, sizeof l2o, "0");
		} else {
			nsource++;
			c = src_get(&cache, s->source_path);
			if (!c->ok) {
				printf("%s:%d: %s: its source cannot be read: %s\n", list, s->line, s->image,
				       c->err);
				nfail++;
				c = NULL;
			} else if (have_img && (img.width != c->img.width || img.height != c->img.height)) {
				printf("%s:%d: %s is %dx%d but its source is %dx%d; no control made\n", list,
				       s->line, s->image, img.width, img.height, c->img.width, c->img.height);
				nfail++;
				c = NULL;
			} else if (have_img) {
				struct pixels_dist dd;
				chans = colour_channels(&info, &c->info);
				pixels_distance(img.rgba, c->img.rgba, (size_t)img.width * (size_t)img.height,
						chans, &dd);
				snprintf(l2o, sizeof l2o, "%.9g", dd.l2);
				budget = dd.l2;
			} else if (!from_level) {
				printf("%s:%d: %s\n", list, s->line, err);
				nfail++;
				c = NULL;
			} else {
				chans = c->info.channels <= 2 ? 1 : 3;
			}
			if (c && from_level) {
				if (!s->has_level) {
					printf("%s:%d: %s has no level to use as the budget\n", list, s->line,
					       s->image);
					nfail++;
					c = NULL;
				} else {
					budget = s->level / units;
				}
			}
		}
		cells[0] = img_rel; cells[1] = s->category; cells[2] = lev; cells[c_src] = src_rel;
		for (size_t k = 0; k < l.nlabels; k++)
			cells[c_lab + k] = s->labels[k];
		cells[c_ctl] = "original";
		cells[c_l2] = l2o;
		wok = csv_row(fo, cells, ncol) == 0;
		image_free(&img);
		if (c && wok && budget == 0) {
			printf("%s:%d: %s: note: budget 0 (the image equals its source); no control "
			       "needed\n", list, s->line, s->image);
		} else if (c && wok) {
			/* Write the control: OUT/<category>/<stem>_rand[_N].png, the category made safe
			 * as one folder name. */
			char *stem = stem_of(s->image);
			char *safe = xstrdup(s->category);
			for (char *q = safe; *q; q++)
				if (*q == '/' || *q == '\\' || (q == safe && *q == '.'))
					*q = '_';
			char *catdir = xasprintf("%s/%s", outdir, safe);
			free(safe);
			char *name = xasprintf("%s/%s_rand.png", catdir, stem);
			for (int k = 2;; k++) {
				size_t u;
				for (u = 0; u < nused && strcmp(used[u], name); u++)
					;
				if (u == nused)
					break;
				free(name);
				name = xasprintf("%s/%s_rand_%d.png", catdir, stem, k);
			}
			used = xrealloc(used, (nused + 1) * sizeof *used);
			used[nused++] = xstrdup(name);
			size_t npix = (size_t)c->img.width * (size_t)c->img.height;
			struct image out = {c->img.width, c->img.height, xmalloc(4 * npix)};
			struct pixels_control res;
			gsl_rng_set(rng, row_seed(seed, s->image));
			int rc = isfinite(budget) && budget >= 0
				 ? pixels_make_control(c->img.rgba, npix, chans, budget, tol, rng, out.rgba, &res)
				 : -1;
			if (rc == -1) {
				printf("%s:%d: %s: budget %g is not usable\n", list, s->line, s->image, budget);
				nfail++;
			} else if (rc == 1) {
				printf("%s:%d: %s: the L2 budget %.6g cannot be reached within %.3g%% (best "
				       "%.6g): too many source values sit at the limits of the range\n", list,
				       s->line, s->image, budget, 100 * tol, res.achieved);
				nfail++;
			} else if (mkdir_p(catdir)) {
				printf("%s:%d: cannot create %s: %s\n", list, s->line, catdir, strerror(errno));
				nfail++;
			} else if (image_save_png(name, &out, err, sizeof err)) {
				printf("%s:%d: cannot write the control: %s\n", list, s->line, err);
				nfail++;
			} else {
				char ach[64];
				snprintf(ach, sizeof ach, "%.9g", res.achieved);
				char *crel = path_relative(name, outdir);
				cells[0] = crel;
				cells[c_ctl] = "random";
				cells[c_l2] = ach;
				wok = csv_row(fo, cells, ncol) == 0;
				printf("%-36s %-40s %10.5g %10.5g %7.3f%% %7.3f%%\n", s->image, crel, budget,
				       res.achieved, budget > 0 ? 100 * (res.achieved - budget) / budget : 0.0,
				       100.0 * (double)res.nclipped / (double)(npix * (size_t)chans));
				free(crel);
				nmade++;
			}
			free(out.rgba);
			free(stem);
			free(catdir);
			free(name);
		}
		free(img_rel);
		free(src_rel);
	}
	if (fclose(fo) || !wok) {
		fprintf(stderr, "tachist stimuli controls: cannot write %s\n", listout);
		nfail++;
	}
	printf("\n%zu control%s written for %zu rows with a source (seed %llu); list %s\n", nmade,
	       nmade == 1 ? "" : "s", nsource, seed, listout);
	if (nfail)
		printf("%zu problem%s (above)\n", nfail, nfail == 1 ? "" : "s");
	for (size_t u = 0; u < nused; u++)
		free(used[u]);
	free(used);
	src_clear(&cache);
	gsl_rng_free(rng);
	free(cells);
	free(listout);
	stimlist_clear(&l);
	return nfail ? EXIT_PROBLEMS : EXIT_OK;
}

int cmd_stimuli(int argc, char **argv)
{
	if (argc < 2) {
		cmd_print_usage("stimuli", stderr);
		return EXIT_USAGE;
	}
	if (!strcmp(argv[1], "import"))
		return stimuli_import(argc - 1, argv + 1);
	if (!strcmp(argv[1], "audit"))
		return stimuli_audit(argc - 1, argv + 1);
	if (!strcmp(argv[1], "controls"))
		return stimuli_controls(argc - 1, argv + 1);
	return usage_error("unknown action '%s' (import, audit or controls)", argv[1]);
}
