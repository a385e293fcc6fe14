/* cmdutil — small helpers every subcommand shares: help detection, diagnostics output, finding the
 * rig and the files shipped with the program, number parsing. */
#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cmd.h"
#include "opts.h"
#include "store_pg.h"

bool cmd_wants_help(int argc, char **argv)
{
	for (int i = 1; i < argc; i++)
		if (!strcmp(argv[i], "--help") || !strcmp(argv[i], "-h"))
			return true;
	return false;
}

void cmd_print_diags(const struct diag_list *d, FILE *out)
{
	char buf[2048];
	for (size_t i = 0; i < d->n; i++) {
		diag_format(&d->v[i], buf, sizeof buf);
		fprintf(out, "%s\n", buf);
	}
}

static bool readable(const char *p)
{
	return access(p, R_OK) == 0;
}

char *cmd_asset_path(const char *rel)
{
	if (readable(rel))
		return xstrdup(rel);
	/* The binary lives in build/ or build/<variant>/ of the source tree. */
	char exe[4096];
	ssize_t n = readlink("/proc/self/exe", exe, sizeof exe - 1);
	if (n <= 0)
		return NULL;
	exe[n] = '\0';
	for (int up = 0; up < 4; up++) {
		char *slash = strrchr(exe, '/');
		if (!slash)
			break;
		*slash = '\0';
		char *cand = xasprintf("%s/%s", exe, rel);
		if (readable(cand))
			return cand;
		free(cand);
	}
	return NULL;
}

char *cmd_rig_path(const char *explicit_path)
{
	bool demo = false;
	char *p = cmd_rig_path_find(explicit_path, &demo);
	if (demo)
		fprintf(stderr, "tachist: warning: no rig profile in $XDG_CONFIG_HOME/tachist/rig.ini; "
			"using the demo rig %s (describe your own display before real sessions)\n", p);
	return p;
}

char *cmd_rig_path_find(const char *explicit_path, bool *is_demo)
{
	*is_demo = false;
	if (explicit_path)
		return xstrdup(explicit_path);
	const char *xdg = getenv("XDG_CONFIG_HOME");
	const char *home = getenv("HOME");
	char *p = NULL;
	if (xdg && *xdg)
		p = xasprintf("%s/tachist/rig.ini", xdg);
	else if (home && *home)
		p = xasprintf("%s/.config/tachist/rig.ini", home);
	if (p && readable(p))
		return p;
	free(p);
	p = cmd_asset_path("assets-demo/rig.ini");
	*is_demo = p != NULL;
	return p;
}

int cmd_parse_u64(const char *s, unsigned long long *out)
{
	if (!s || !*s || *s == '-' || *s == '+')
		return -1;
	char *end;
	errno = 0;
	unsigned long long v = strtoull(s, &end, 10);
	if (errno || *end)
		return -1;
	*out = v;
	return 0;
}

int cmd_parse_double(const char *s, double *out)
{
	if (!s || !*s)
		return -1;
	char *end;
	errno = 0;
	double v = strtod(s, &end);
	if (errno || *end || !isfinite(v))
		return -1;
	*out = v;
	return 0;
}

int cmd_server_schema(const char *cmd, const char *opt, const char *target, const char *schema)
{
	if (!schema)
		return 0;
	if (!store_pg_is_conninfo(target))
		return opts_usage(cmd, "--schema needs a PostgreSQL server for %s (postgresql://...)",
				  opt);
	if (!store_pg_schema_valid(schema))
		return opts_usage(cmd, "'%s' is not a schema name tachist uses (lower-case letters, "
				  "digits and '_', starting with a letter or '_')", schema);
	return 0;
}
