/*
 * fuzz_config.c - fuzz target for the config loader (daemon/config.c):
 * config_load_buffer on the input as config text, then config_free and
 * cfg_errors_free.  Relative layout paths resolve against $TP_FUZZ_BASE,
 * default "demo" (the run scripts start from the repository root), so
 * seeds can name demo/layouts/quillet-v1.json as "layouts/quillet-v1.json".
 *
 * Properties (config.h): a failed load reports at least one problem and
 * returns no config; a loaded config holds only layouts that pass
 * tp_layout_validate, layout_ptrs[i] == &layouts[i], and named stations;
 * every kept message is a non-empty string; n <= CFG_MAX_ERRORS.
 * Leaks are found by ASan's leak checker in the libFuzzer build.
 */
#include <stdint.h>
#include <stdlib.h>

#include "config.h"
#include "tidepost/layout.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static void check_errors(const struct cfg_errors *e)
{
	size_t i;

	if (e->n > CFG_MAX_ERRORS)
		abort();
	for (i = 0; i < e->n; i++)
		if (e->msg[i] == NULL || e->msg[i][0] == '\0')
			abort();
}

static void check_config(const struct config *c)
{
	struct tp_layout_problem pb;
	size_t i;

	if (c->n_layouts && (c->layouts == NULL || c->layout_ptrs == NULL))
		abort();
	for (i = 0; i < c->n_layouts; i++) {
		if (c->layout_ptrs[i] != &c->layouts[i] ||
		    tp_layout_validate(&c->layouts[i], &pb) != TP_OK)
			abort();
	}
	for (i = 0; i < c->n_stations; i++)
		if (c->stations[i].name == NULL ||
		    config_station(c, c->stations[i].number) == NULL)
			abort();
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	const char *base = getenv("TP_FUZZ_BASE");
	struct config *cfg = NULL;
	struct cfg_errors errs = { 0 };
	int rc;

	rc = config_load_buffer("fuzz.json", (const char *)data, size,
	                        base ? base : "demo", &cfg, &errs);
	check_errors(&errs);
	if (rc == 0) {
		if (cfg == NULL)
			abort();
		check_config(cfg);
		config_free(cfg);
	} else if (rc != -1 || cfg != NULL || errs.n == 0) {
		abort();
	}
	cfg_errors_free(&errs);
	return 0;
}
