/* fit_batch — fit_run on many grouped data sets in one process, for comparisons with an independent
 * optimiser. Reads lines "M SHAPE LAPSE L1 N1 K1 L2 N2 K2 ..." on stdin (SHAPE weibull|logistic|
 * normal, LAPSE free|0|VALUE) and prints per line "ok ALPHA BETA LAMBDA LOGLIK BOUNDED" (BOUNDED 1
 * when the slope sits on its steepness bound) or "unsupported REASON" / "noconv REASON". No
 * bootstrap. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fit.h"

int main(void)
{
	static char line[65536];
	while (fgets(line, sizeof line, stdin)) {
		char *save = NULL, *tok = strtok_r(line, " \t\n", &save);
		if (!tok)
			continue;
		struct fit_opts o;
		fit_opts_default(&o, atoi(tok));
		o.nboot = 0;
		char *shape = strtok_r(NULL, " \t\n", &save), *lapse = strtok_r(NULL, " \t\n", &save);
		if (!shape || !lapse || psyfn_shape_parse(shape, &o.shape) < 0 ||
		    fit_lapse_parse(lapse, &o) < 0) {
			printf("badline\n");
			continue;
		}
		struct fit_point pts[256];
		size_t n = 0;
		char *a, *b, *c;
		while (n < 256 && (a = strtok_r(NULL, " \t\n", &save)) &&
		       (b = strtok_r(NULL, " \t\n", &save)) && (c = strtok_r(NULL, " \t\n", &save)))
			pts[n++] = (struct fit_point){strtod(a, NULL), strtoul(b, NULL, 10),
						      strtoul(c, NULL, 10)};
		struct fit_result r;
		fit_run(pts, n, &o, &r);
		if (r.status == FIT_OK)
			printf("ok %.12g %.12g %.12g %.12g %d\n", r.f.alpha, r.f.beta, r.f.lambda, r.loglik,
			       r.slope_bounded ? 1 : 0);
		else
			printf("%s %s\n", r.status == FIT_UNSUPPORTED ? "unsupported" : "noconv", r.reason);
		fflush(stdout);
	}
	return 0;
}
