/* test_inputs — the one loader of protocol + rig + list + images: what it loads, that its plan is
 * the plan of the parts loaded one by one, and that it reports every problem (a truncated image,
 * the list of a faulty protocol, a missing or stored rig). Runs from the source tree's root. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "inputs.h"
#include "protocol_file.h"
#include "rig_file.h"
#include "stimlist_file.h"

#define GOOD "tests/data/good/"

/* True when some diagnostic formats to text containing NEEDLE. */
static bool has_diag(const struct diag_list *d, const char *needle)
{
	char buf[2048];
	for (size_t i = 0; i < d->n; i++) {
		diag_format(&d->v[i], buf, sizeof buf);
		if (strstr(buf, needle))
			return true;
	}
	return false;
}

static void print_diags(const struct diag_list *d)
{
	char buf[2048];
	for (size_t i = 0; i < d->n; i++) {
		diag_format(&d->v[i], buf, sizeof buf);
		print_message("diag: %s\n", buf);
	}
}

static void inputs_testGoodSameAsParts(void **state)
{
	(void)state;
	struct inputs_options o = {.protocol_path = GOOD "protocol.ini", .rig_path = GOOD "rig.ini",
				   .seed = 7};
	struct inputs in;
	struct diag_list d;
	diag_init(&d);
	int rc = inputs_load(&o, &in, &d);
	print_diags(&d);
	assert_int_equal(rc, 0);
	assert_int_equal(diag_count(&d, DIAG_ERROR), 0);
	assert_true(in.have_proto && in.have_rig && in.have_list && in.have_plan);
	assert_int_equal(in.list.n, 4);
	/* The same plan as the parts loaded and planned one by one. */
	struct protocol p;
	struct rig r;
	struct stimlist l;
	struct plan pl;
	struct diag_list d2;
	diag_init(&d2);
	assert_int_equal(protocol_load(GOOD "protocol.ini", &p, &d2), 0);
	assert_int_equal(rig_load(GOOD "rig.ini", &r, &d2), 0);
	assert_int_equal(stimlist_load(p.stimuli, &p, &l, &d2), 0);
	assert_int_equal(plan_build(&p, &l, &r, 7, &pl, &d2), 0);
	assert_int_equal(in.plan.ntrials, pl.ntrials);
	assert_string_equal(in.plan.hash, pl.hash);
	assert_string_equal(in.list.sha256, l.sha256);
	plan_clear(&pl);
	stimlist_clear(&l);
	rig_clear(&r);
	protocol_clear(&p);
	diag_clear(&d2);
	inputs_clear(&in);
	inputs_clear(NULL);
	diag_clear(&d);
}

static void inputs_testTruncatedImage(void **state)
{
	(void)state;
	struct inputs_options o = {.protocol_path = "tests/data/bad/i02_image_truncated/protocol.ini",
				   .rig_path = GOOD "rig.ini", .seed = 1};
	struct inputs in;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(inputs_load(&o, &in, &d), -1);
	print_diags(&d);
	/* Protocol, rig and list are fine and a plan exists, but the image is refused. */
	assert_true(in.have_proto && in.have_rig && in.have_list);
	assert_int_equal(diag_count(&d, DIAG_ERROR), 1);
	assert_true(has_diag(&d, "i02_image_truncated/list.csv:6: error: image 'truncated.png': "));
	inputs_clear(&in);
	diag_clear(&d);
}

static void inputs_testRigMissingOrStored(void **state)
{
	(void)state;
	struct inputs in;
	struct diag_list d;
	diag_init(&d);
	/* No rig, no message asked for: no plan, nothing said about the rig, the list still read. */
	struct inputs_options o = {.protocol_path = GOOD "protocol.ini", .seed = 1};
	assert_int_equal(inputs_load(&o, &in, &d), -1);
	assert_int_equal(d.n, 0);
	assert_true(in.have_list && !in.have_rig && !in.have_plan);
	inputs_clear(&in);
	/* With a message, it is the error. */
	o.missing_rig = "no rig here";
	assert_int_equal(inputs_load(&o, &in, &d), -1);
	assert_true(has_diag(&d, "error: no rig here"));
	inputs_clear(&in);
	diag_clear(&d);
	diag_init(&d);
	/* A stored rig's text, named "(stored rig)" in messages. */
	o.rig_text = "[screen]\nwidth_cm = 53\nheight_cm = 30\nwidth_px = 1920\nheight_px = 1080\n"
		     "distance_cm = 57\nrefresh_hz = 0\n";
	assert_int_equal(inputs_load(&o, &in, &d), -1);
	print_diags(&d);
	assert_true(has_diag(&d, "(stored rig):7: error: refresh_hz"));
	inputs_clear(&in);
	diag_clear(&d);
}

/* A protocol with an error still has its list read, so one pass reports both files' problems. */
static void inputs_testListOfFaultyProtocol(void **state)
{
	(void)state;
	char dir[] = "/tmp/test_inputs.XXXXXX";
	assert_non_null(mkdtemp(dir));
	char proto[128], list[128];
	snprintf(proto, sizeof proto, "%s/p.ini", dir);
	snprintf(list, sizeof list, "%s/l.csv", dir);
	FILE *f = fopen(proto, "w");
	assert_non_null(f);
	fprintf(f, "[experiment]\nname = x\nlist = l.csv\n[categories]\nring = f\nbar = j\n"
		   "[timing]\nstimulus_ms = 200\nbogus_ms = 3\n[display]\nsize_deg = 1\n"
		   "[block main]\n");
	fclose(f);
	f = fopen(list, "w");
	assert_non_null(f);
	fprintf(f, "image,category\nnone.png,ring\nnone2.png,baz\n");
	fclose(f);
	struct inputs_options o = {.protocol_path = proto, .rig_path = GOOD "rig.ini", .seed = 1};
	struct inputs in;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(inputs_load(&o, &in, &d), -1);
	print_diags(&d);
	assert_false(in.have_proto);
	assert_true(has_diag(&d, "p.ini:9: error: unknown key 'bogus_ms'"));
	assert_true(has_diag(&d, "l.csv:3: error: category 'baz'"));
	assert_true(has_diag(&d, "l.csv:2: error: image 'none.png'"));
	inputs_clear(&in);
	diag_clear(&d);
	unlink(proto);
	unlink(list);
	rmdir(dir);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(inputs_testGoodSameAsParts),
		cmocka_unit_test(inputs_testTruncatedImage),
		cmocka_unit_test(inputs_testRigMissingOrStored),
		cmocka_unit_test(inputs_testListOfFaultyProtocol),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
