/* stimproto — the starting protocol written by `stimuli import --protocol` (see stimproto.h).
 *
 * The text is built section by section with a comment above every key; values are starting
 * points that `check` accepts, chosen to be edited. The run limit of the main block is 3 when the
 * categories' sizes allow a random order with no run longer (the largest category m and the
 * other n − m images: m ≤ 3(n − m + 1)), else 0 (no limit), so the file never fails `check`. */
#include "stimproto.h"

#include <ctype.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "diag.h"
#include "fspath.h"
#include "protocol.h"

#define RUN_LIMIT 3

/* Splits KEYS at commas (spaces around a key are dropped) into at most MAX keys. Returns the
 * count, or -1 with ERR for an empty or repeated key. */
static int split_keys(const char *keys, char **out, size_t max, char *err, size_t errlen)
{
	size_t n = 0;
	const char *p = keys;
	while (*p) {
		size_t len = strcspn(p, ",");
		const char *a = p, *b = p + len;
		while (a < b && isspace((unsigned char)*a))
			a++;
		while (b > a && isspace((unsigned char)b[-1]))
			b--;
		if (a == b) {
			snprintf(err, errlen, "an empty key in the row of keys '%s'", keys);
			goto fail;
		}
		if (n == max) {
			snprintf(err, errlen, "more than %zu keys in '%s'", max, keys);
			goto fail;
		}
		out[n] = xmalloc((size_t)(b - a) + 1);
		memcpy(out[n], a, (size_t)(b - a));
		out[n][b - a] = '\0';
		for (size_t k = 0; k < n; k++)
			if (!strcasecmp(out[k], out[n])) {
				snprintf(err, errlen, "the key '%s' is named twice in '%s'", out[n], keys);
				n++;
				goto fail;
			}
		n++;
		p += len + (p[len] == ',');
	}
	return (int)n;
fail:
	for (size_t k = 0; k < n; k++)
		free(out[k]);
	return -1;
}

/* A category name a protocol line can hold: no ',' '&' '=', no comment or section start, no
 * surrounding spaces. */
static int category_ok(const char *c)
{
	size_t n = strlen(c);
	return n && n < 100 && !strpbrk(c, ",&=\r\n") && !strchr(";#[", c[0]) &&
	       !isspace((unsigned char)c[0]) && !isspace((unsigned char)c[n - 1]);
}

/* The protocol's name from its file name: letters, digits, '_' and '-', at most 64. */
static void name_from_path(const char *path, char out[65])
{
	char *stem = fspath_stem(path);
	size_t k = 0;
	for (const char *p = stem; *p && k < 64; p++)
		out[k++] = isalnum((unsigned char)*p) || *p == '-' ? *p : '_';
	out[k] = '\0';
	if (!k)
		snprintf(out, 65, "study");
	free(stem);
}

static void put_head(FILE *f, const struct stimproto_input *in, const char *list_rel)
{
	char name[65];
	name_from_path(in->path, name);
	fprintf(f, "; A starting protocol written by `tachist stimuli import` for %zu categories.\n"
		"; Every value below is a starting point: read the comment above each key, edit it\n"
		"; for the study, then run `tachist check` on this file.\n\n", in->ncategories);
	fprintf(f, "[experiment]\n; name: a short name for tables and file names (letters, digits, "
		"_ and -)\nname = %s\n; list: the stimulus list, relative to this file\nlist = %s\n"
		"; break_every: trials between rest breaks inside a block (0 = none)\nbreak_every = 0\n\n",
		name, list_rel);
}

static void put_categories(FILE *f, const struct stimproto_input *in, char *const *keys,
			   const char *row)
{
	fprintf(f, "[categories]\n; CATEGORY = KEY: the key the observer presses for each "
		"category, handed out\n; from the row %s; change any key to suit the keyboard and "
		"the observers' hands\n", row);
	for (size_t k = 0; k < in->ncategories; k++)
		fprintf(f, "%s = %s\n", in->categories[k], keys[k]);
	fputc('\n', f);
}

static void put_timing_display(FILE *f)
{
	fputs("[timing]\n"
	      "; fixation_ms: fixation mark before the stimulus\nfixation_ms = 500\n"
	      "; blank_ms: blank screen between fixation and stimulus\nblank_ms = 0\n"
	      "; stimulus_ms: exposure, rounded to whole frames of the rig; choose it for the "
	      "question\nstimulus_ms = 100\n"
	      "; mask_ms: mask after the stimulus (0 = none; set [display] mask too)\nmask_ms = 0\n"
	      "; response_ms: response window after the stimulus (0 = wait without limit)\n"
	      "response_ms = 0\n"
	      "; feedback_ms: feedback after the response, in blocks with feedback\nfeedback_ms = 500\n"
	      "; iti_ms: interval between trials\niti_ms = 500\n\n"
	      "[display]\n"
	      "; size_deg: the stimulus's longer side in degrees of visual angle\nsize_deg = 4\n"
	      "; background: background grey level, 0-255\nbackground = 128\n"
	      "; fixation_deg: size of the fixation mark (0 = none)\nfixation_deg = 0.3\n"
	      "; mask: none, noise or image (with mask_image = FILE)\nmask = none\n"
	      "; feedback: none, or mark (a tick or a cross at fixation)\nfeedback = mark\n"
	      "; scaling: linear or nearest, the filter for scaling images\nscaling = linear\n\n", f);
}

/* 1 when a random order of these category sizes can keep every run at most RUN_LIMIT long. */
static int run_limit_fits(const size_t *counts, size_t n)
{
	size_t total = 0, m = 0;
	for (size_t k = 0; k < n; k++) {
		total += counts[k];
		m = counts[k] > m ? counts[k] : m;
	}
	return m <= RUN_LIMIT * (total - m + 1);
}

/* 1 when the practice images fit one select line (INI lines hold 198 bytes) and hold no
 * character a filter treats specially. */
static int practice_fits(const struct stimproto_input *in)
{
	if (!in->practice)
		return 0;
	size_t len = strlen("select = image=");
	for (size_t k = 0; k < in->ncategories; k++) {
		if (strpbrk(in->practice[k], ",&=;#"))
			return 0;
		len += strlen(in->practice[k]) + 1;
	}
	return len <= 190;
}

static void put_blocks(FILE *f, const struct stimproto_input *in)
{
	fputs("[block practice]\n", f);
	if (practice_fits(in)) {
		fputs("; select: one image of each category; practice shows them with feedback\n"
		      "select = image=", f);
		for (size_t k = 0; k < in->ncategories; k++)
			fprintf(f, "%s%s", k ? "," : "", in->practice[k]);
		fputc('\n', f);
	} else if (in->have_level) {
		fputs("; select: the clean images (level 0); narrow it with more clauses\n"
		      "select = level=0\n", f);
	} else {
		fputs("; select: every image; narrow it, e.g. select = image=A,B\n", f);
	}
	fputs("; practice: marked as practice in the data, with feedback\npractice = yes\n"
	      "; order: random or fixed\norder = random\n\n", f);
	int limit = run_limit_fits(in->counts, in->ncategories) ? RUN_LIMIT : 0;
	fprintf(f, "[block main]\n; every image of the list once (add select = ... to choose rows)\n"
		"; repeats: how many times each image is shown\nrepeats = 1\n"
		"; order: random or fixed\norder = random\n"
		"; longest_streak: most trials of one category in a row (0 = no limit)\n"
		"longest_streak = %d\n"
		"; repeat_faults: show trials with timing faults again at the end of the block\n"
		"repeat_faults = yes\n", limit);
}

int stimproto_write(const struct stimproto_input *in, char *err, size_t errlen)
{
	const char *row = in->keys ? in->keys : STIMPROTO_KEYS;
	char *keys[PROTOCOL_MAX_CHOICES];
	int nkeys = split_keys(row, keys, PROTOCOL_MAX_CHOICES, err, errlen);
	if (nkeys < 0)
		return -1;
	int rc = -1;
	if (in->ncategories < 2) {
		snprintf(err, errlen, "a protocol needs at least 2 categories; %zu found",
			 in->ncategories);
		goto done;
	}
	if (in->ncategories > (size_t)nkeys) {
		snprintf(err, errlen, "%zu categories but %d keys in the row %s; give more with "
			 "--keys", in->ncategories, nkeys, row);
		goto done;
	}
	for (size_t k = 0; k < in->ncategories; k++)
		if (!category_ok(in->categories[k])) {
			snprintf(err, errlen, "the category '%s' cannot be a protocol key (no ',', '&' "
				 "or '=', no leading ';', '#' or '[', no surrounding spaces); rename "
				 "its folder", in->categories[k]);
			goto done;
		}
	FILE *f = fopen(in->path, "wx");   /* an edited protocol is never overwritten */
	if (!f) {
		if (errno == EEXIST)
			snprintf(err, errlen, "%s exists already; not overwritten (remove it or name "
				 "another file)", in->path);
		else
			snprintf(err, errlen, "cannot write %s: %s", in->path, strerror(errno));
		goto done;
	}
	char *pdir = fspath_dir(in->path);
	char *list_rel = fspath_relative(in->list, pdir);
	put_head(f, in, list_rel);
	put_categories(f, in, keys, row);
	put_timing_display(f);
	put_blocks(f, in);
	free(pdir);
	free(list_rel);
	if (fclose(f)) {
		snprintf(err, errlen, "cannot write %s: %s", in->path, strerror(errno));
		goto done;
	}
	rc = 0;
done:
	for (int k = 0; k < nkeys; k++)
		free(keys[k]);
	return rc;
}
