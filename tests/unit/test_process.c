/*
 * test_process.c - the per-station reading pipeline (process.h) and the
 * science keys of the config (cfgderive.h): QC before derivation, peers
 * before the values that use them, derived flags from QC'd inputs, QC of
 * derived values, the previous reading's update, gaps, unknown stations,
 * and placed messages for bad science keys.
 *
 * All configs, layouts, stations and readings here are invented test
 * data.  Expected flags follow from the QARTOD rules in qc.h applied by
 * hand to the invented numbers (each row says how).
 */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "config.h"
#include "process.h"

/* Slots of the invented layout "t1". */
enum { S_STATION, S_TIME, S_TEMP, S_COND, S_PH, S_OXY, S_N };

#define LAYOUT                                                                 \
	"{\"name\": \"t1\", \"fields\": ["                                     \
	"{\"name\": \"station\", \"type\": \"u16\", \"role\": \"station\"},"   \
	"{\"name\": \"time\", \"type\": \"u32\", \"role\": \"time\","          \
	" \"epoch\": \"1970-01-01T00:00:00Z\"},"                               \
	"{\"name\": \"temperature\", \"type\": \"i16\", \"scale\": 0.01,"      \
	" \"unit\": \"degC\", \"standard_name\": \"sea_water_temperature\","   \
	" \"range\": [-2, 40]},"                                               \
	"{\"name\": \"conductivity\", \"type\": \"u32\", \"scale\": 0.001,"    \
	" \"unit\": \"mS/cm\","                                                \
	" \"standard_name\": \"sea_water_electrical_conductivity\"},"          \
	"{\"name\": \"ph\", \"type\": \"u16\", \"scale\": 0.001,"              \
	" \"unit\": \"1\","                                                    \
	" \"standard_name\": \"sea_water_ph_reported_on_total_scale\","        \
	" \"range\": [6.5, 9]},"                                               \
	"{\"name\": \"oxygen\", \"type\": \"u16\", \"scale\": 0.1,"            \
	" \"unit\": \"umol/kg\", \"standard_name\":"                           \
	" \"moles_of_oxygen_per_unit_mass_in_sea_water\"}]}"

/* Station 7: ph QC'd with temperature as its multi-variate peer (named
 * AFTER ph, so the pipeline must reorder), salinity QC'd as a derived
 * value, TA from salinity (invented coefficients). */
static const char cfg_text[] =
    "{\"layouts\": [" LAYOUT "],\n"
    " \"stations\": {\"7\": {\"name\": \"s7\", \"expect_every_s\": 900,\n"
    "  \"alkalinity\": {\"per_salinity\": 65.7, \"at_zero\": 0},\n"
    "  \"qc\": {\n"
    "   \"ph\": {\"suspect\": [7.7, 8.4], \"spike\": 0.35,"
    " \"spike_fail\": 0.5, \"flat_n\": 4,\n"
    "     \"multi_variate\": {\"with\": \"temperature\", \"n_dev\": 3,"
    " \"with_n_dev\": 3, \"window_h\": 25}},\n"
    "   \"temperature\": {\"fail\": [10, 35]},\n"
    "   \"salinity\": {\"suspect\": [30, 38]}}}}}";

static struct config *load(const char *text)
{
	struct cfg_errors e;
	struct config *c = NULL;
	size_t i;

	if (config_load_buffer("t.json", text, strlen(text), ".", &c, &e) !=
	    0) {
		for (i = 0; i < e.n; i++)
			fprintf(stderr, "%s\n", e.msg[i]);
		cfg_errors_free(&e);
		return NULL;
	}
	cfg_errors_free(&e);
	return c;
}

/* An invented reading; NAN: missing (flag 9).  Conductivity 53.0 mS/cm
 * at 27 degC is salinity about 35 (PSS-78; [from memory], checked only as
 * a range below). */
static void reading(struct tp_reading *r, int64_t t, double temp, double cond,
                    double ph, double oxy)
{
	double v[S_N] = {7, (double)t, temp, cond, ph, oxy};
	size_t i;

	memset(r, 0, sizeof(*r));
	r->time_s = t;
	r->n_values = S_N;
	for (i = 0; i < S_N; i++) {
		r->values[i].v = v[i];
		r->values[i].flag =
		    isnan(v[i]) ? TP_FLAG_MISSING : TP_FLAG_PASS;
	}
	if (temp > 40 || temp < -2) /* the decoder's range flag */
		r->values[S_TEMP].flag = TP_FLAG_FAIL;
}

static int slot_of(const struct proc_out *o, const char *name)
{
	const struct tp_derived_info *d = tp_derive_find(o->plan, name);

	return d != NULL ? (int)d->slot : -1;
}

static const uint8_t *tests_of(const struct proc_out *o, const char *name)
{
	size_t i;

	for (i = 0; i < o->n_tests; i++)
		if (strcmp(o->test[i].name, name) == 0)
			return o->test[i].test;
	return NULL;
}

struct fixture {
	struct config *cfg;
	struct process *p;
	struct proc_out out;
	struct tp_reading r;
};

static int setup(void **state)
{
	struct fixture *f = calloc(1, sizeof(*f));

	if (f == NULL)
		return -1;
	f->cfg = load(cfg_text);
	f->p = f->cfg != NULL ? process_new(f->cfg) : NULL;
	*state = f;
	return f->p != NULL ? 0 : -1;
}

static int teardown(void **state)
{
	struct fixture *f = *state;

	process_free(f->p);
	config_free(f->cfg);
	free(f);
	return 0;
}

static void run(struct fixture *f, uint32_t station, int64_t t, double temp,
                double cond, double ph, double oxy, uint64_t ref,
                const char *id)
{
	reading(&f->r, t, temp, cond, ph, oxy);
	assert_int_equal(process_reading(f->p, station, &f->cfg->layouts[0],
	                                 &f->r, ref, id, &f->out),
	                 0);
}

/* Derived values come after the layout's slots with sensible numbers;
 * carbonate values exist because TA comes from salinity. */
static void test_derived_values(void **state)
{
	struct fixture *f = *state;
	int sp, sat, om;

	run(f, 7, 1000, 27.0, 53.0, 8.05, 200.0, 1, "a");
	sp = slot_of(&f->out, "salinity");
	sat = slot_of(&f->out, "oxygen_saturation");
	om = slot_of(&f->out, "omega_aragonite");
	assert_int_equal(sp, S_N); /* first derived value, right after */
	assert_true(f->out.spike); /* ph has a spike test */
	assert_true(sat > sp && om > sat);
	assert_int_equal(f->r.n_values,
	                 f->out.plan->n_slots + f->out.plan->n_out);
	/* invented warm reef water: S ~35, O2 sat ~100 %, Omega_ar 3-4.5
	 * (common practice for such water, no source) */
	assert_true(f->r.values[sp].v > 33 && f->r.values[sp].v < 37);
	assert_true(f->r.values[sat].v > 80 && f->r.values[sat].v < 120);
	assert_true(f->r.values[om].v > 3 && f->r.values[om].v < 4.5);
	assert_int_equal(f->r.values[sp].flag, TP_FLAG_PASS);
	assert_non_null(process_derived(f->out.plan, (size_t)sp));
	assert_null(process_derived(f->out.plan, S_PH));
}

/* QC runs before derivation: a temperature inside the layout's range but
 * outside the station's fail span is flagged 4 by QC, and salinity (an
 * output of temperature) inherits the 4.  A missing conductivity gives a
 * null salinity with flag 9. */
static void test_qc_before_derive(void **state)
{
	struct fixture *f = *state;
	int sp;

	run(f, 7, 1000, 36.0, 53.0, 8.05, 200.0, 1, "a");
	sp = slot_of(&f->out, "salinity");
	assert_int_equal(f->r.values[S_TEMP].flag, TP_FLAG_FAIL);
	assert_int_equal(tests_of(&f->out, "temperature")[TP_QC_GROSS_RANGE],
	                 TP_FLAG_FAIL);
	assert_int_equal(f->r.values[sp].flag, TP_FLAG_FAIL);
	run(f, 7, 1900, 27.0, NAN, 8.05, 200.0, 2, "b");
	assert_int_equal(f->r.values[sp].flag, TP_FLAG_MISSING);
	assert_true(isnan(f->r.values[sp].v));
}

/* QC of a derived value: conductivity 60 mS/cm at 27 degC is salinity
 * above 38 (PSS-78 rises with C; ~40 [from memory]) -> suspect 3 by the
 * salinity entry's gross range. */
static void test_derived_qc(void **state)
{
	struct fixture *f = *state;
	const uint8_t *t;
	int sp;

	run(f, 7, 1000, 27.0, 60.0, 8.05, 200.0, 1, "a");
	sp = slot_of(&f->out, "salinity");
	t = tests_of(&f->out, "salinity");
	assert_non_null(t);
	assert_true(f->r.values[sp].v > 38);
	assert_int_equal(t[TP_QC_GROSS_RANGE], TP_FLAG_SUSPECT);
	assert_int_equal(f->r.values[sp].flag, TP_FLAG_SUSPECT);
}

/* The multi-variate peer runs first although the config names it after
 * ph: with steady, slightly noisy temperature and pH, a pH step of 0.3
 * (far beyond 3 SDs of ~0.002 noise) while temperature stays quiet is
 * suspect.  Were temperature QC'd after ph, its state would not hold this
 * reading's time and the test would stay 2. */
static void test_peer_first(void **state)
{
	static const double noise[] = {0.002,  -0.001, 0.0, 0.001,
	                               -0.002, 0.001,  0.0, -0.001};
	struct fixture *f = *state;
	const uint8_t *t;
	size_t i;

	for (i = 0; i < 8; i++)
		run(f, 7, 1000 + 900 * (int64_t)i, 27.0 + noise[i] * 5, 53.0,
		    8.0 + noise[i], 200.0, i + 1, "x");
	t = tests_of(&f->out, "ph");
	assert_int_equal(t[TP_QC_MULTI_VARIATE], TP_FLAG_PASS);
	run(f, 7, 1000 + 900 * 8, 27.0, 53.0, 8.3, 200.0, 9, "step");
	t = tests_of(&f->out, "ph");
	assert_int_equal(t[TP_QC_MULTI_VARIATE], TP_FLAG_SUSPECT);
	assert_int_equal(f->r.values[S_PH].flag, TP_FLAG_SUSPECT);
}

/* The spike of reading 3 (8.6 between 8.0 and 8.0: 0.6 > spike_fail 0.5)
 * is judged when reading 4 arrives: reading 3 went out with spike 2 and
 * flag 3 (suspect span 7.7..8.4), the update raises it to 4 by id.
 * Reading 2 (0.3 from its reference, under 0.35) passes: flag unchanged,
 * so no update for it; reading 4 neither. */
static void test_spike_update(void **state)
{
	static const double ph[] = {8.0, 8.0, 8.6, 8.0, 8.0};
	static const char *const ids[] = {"r1", "r2", "r3", "r4", "r5"};
	struct fixture *f = *state;
	size_t i;

	for (i = 0; i < 5; i++) {
		run(f, 7, 1000 + 900 * (int64_t)i, 27.0 + 0.01 * (double)i,
		    53.0, ph[i], 200.0, 100 + i, ids[i]);
		if (i == 2) {
			assert_int_equal(tests_of(&f->out, "ph")[TP_QC_SPIKE],
			                 TP_FLAG_NOT_EVALUATED);
			assert_int_equal(f->r.values[S_PH].flag,
			                 TP_FLAG_SUSPECT);
		}
		if (i == 3) {
			assert_int_equal(f->out.n_updates, 1);
			assert_string_equal(f->out.update[0].id, "r3");
			assert_int_equal(f->out.update[0].ref, 102);
			assert_string_equal(f->out.update[0].name, "ph");
			assert_int_equal(f->out.update[0].spike, TP_FLAG_FAIL);
			assert_int_equal(f->out.update[0].flag, TP_FLAG_FAIL);
			assert_int_equal(f->out.update[0].slot, S_PH);
		} else {
			assert_int_equal(f->out.n_updates, 0);
		}
	}
}

/* Flat line: flat_n 4 means four equal values in a row -> 3; the fourth
 * equal pH is suspect, the third cannot be judged yet (2).  Equal within half
 * the field's scale (0.0005): 8.0002 counts as 8.000. */
static void test_flat_line(void **state)
{
	static const double ph[] = {8.0, 8.0002, 8.0, 8.0};
	struct fixture *f = *state;
	size_t i;

	for (i = 0; i < 4; i++) {
		run(f, 7, 1000 + 900 * (int64_t)i, 27.0 + 0.01 * (double)i,
		    53.0, ph[i], 200.0, i + 1, "x");
		if (i == 2) /* 2 earlier values, the count needs 3 */
			assert_int_equal(
			    tests_of(&f->out, "ph")[TP_QC_FLAT_LINE],
			    TP_FLAG_NOT_EVALUATED);
	}
	assert_int_equal(tests_of(&f->out, "ph")[TP_QC_FLAT_LINE],
	                 TP_FLAG_SUSPECT);
	assert_int_equal(f->r.values[S_PH].flag, TP_FLAG_SUSPECT);
}

/* Gap: expect_every_s 900 gives gap_s 1800; a reading 3000 s after the
 * previous one carries gap 9, but a 9 from the gap test never makes the
 * reading's flag worse than a pass. */
static void test_gap(void **state)
{
	struct fixture *f = *state;
	const uint8_t *t;

	run(f, 7, 1000, 27.0, 53.0, 8.0, 200.0, 1, "a");
	t = tests_of(&f->out, "temperature");
	assert_int_equal(t[TP_QC_GAP], TP_FLAG_NOT_EVALUATED);
	run(f, 7, 1900, 27.1, 53.0, 8.01, 200.0, 2, "b");
	assert_int_equal(tests_of(&f->out, "temperature")[TP_QC_GAP],
	                 TP_FLAG_PASS);
	run(f, 7, 4900, 27.2, 53.0, 8.02, 200.0, 3, "c");
	assert_int_equal(tests_of(&f->out, "temperature")[TP_QC_GAP],
	                 TP_FLAG_MISSING);
	assert_int_equal(f->r.values[S_TEMP].flag, TP_FLAG_PASS);
}

/* A station not in the config: derived salinity and oxygen (a zeroed
 * derive cfg: no TA, so no carbonate values), no QC tests, and its own
 * lane (station 7's history is not touched). */
static void test_unknown_station(void **state)
{
	struct fixture *f = *state;

	run(f, 99, 1000, 27.0, 53.0, 8.05, 200.0, 1, "u");
	assert_int_equal(f->out.n_tests, 0);
	assert_false(f->out.spike); /* nothing to hold back for */
	assert_true(slot_of(&f->out, "salinity") >= S_N);
	assert_int_equal(slot_of(&f->out, "omega_aragonite"), -1);
	assert_int_equal(f->r.values[S_PH].flag, TP_FLAG_PASS);
}

/* A reading that does not match the layout is refused untouched. */
static void test_bad_reading(void **state)
{
	struct fixture *f = *state;

	reading(&f->r, 1000, 27.0, 53.0, 8.05, 200.0);
	f->r.n_values = S_N - 1;
	assert_int_equal(process_reading(f->p, 7, &f->cfg->layouts[0], &f->r, 1,
	                                 "a", &f->out),
	                 -1);
	assert_int_equal(f->r.n_values, S_N - 1);
	assert_null(f->out.plan);
}

/* QC names for CSV columns: each once, in config order. */
static void test_qc_names(void **state)
{
	struct fixture *f = *state;
	const char *names[8];

	assert_int_equal(process_qc_names(f->cfg, names, 8), 3);
	assert_string_equal(names[0], "ph");
	assert_string_equal(names[1], "temperature");
	assert_string_equal(names[2], "salinity");
	assert_int_equal(process_qc_names(f->cfg, names, 2), 2);
}

/* Derived names up front: what station 7 (TA from salinity) or an
 * unconfigured station can derive with t1, in derive.h's order; no ph
 * (no ratio field) and no ph_insitu (no measurement temperature). */
static void test_derived_names(void **state)
{
	static const char *const want[] = {"salinity",
	                                   "oxygen_solubility",
	                                   "oxygen_saturation",
	                                   "alkalinity",
	                                   "pco2",
	                                   "fco2",
	                                   "dic",
	                                   "carbonate_ion",
	                                   "omega_aragonite",
	                                   "omega_calcite"};
	struct fixture *f = *state;
	const char *names[TP_DV_N];
	size_t i, n = process_derived_names(f->cfg, names, TP_DV_N);

	assert_int_equal(n, sizeof(want) / sizeof(want[0]));
	for (i = 0; i < n; i++)
		assert_string_equal(names[i], want[i]);
	assert_int_equal(process_derived_names(f->cfg, names, 2), 2);
}

/* Hold-one: the spike reading is held until the next one arrives, then
 * the update for its ref makes its flag 4 and its spike test 4 before it
 * is written; an update for an older ref leaves the held one alone. */
static void test_hold_one(void **state)
{
	static const double ph[] = {8.0, 8.0, 8.6, 8.0};
	struct fixture *f = *state;
	struct proc_hold *h = proc_hold_new();
	struct proc_held *x = NULL;
	struct tp_packet pk;
	size_t i, j;

	assert_non_null(h);
	memset(&pk, 0, sizeof(pk));
	pk.layout = &f->cfg->layouts[0];
	for (i = 0; i < 4; i++) {
		run(f, 7, 1000 + 900 * (int64_t)i, 27.0, 53.0, ph[i], 200.0,
		    10 + i, "h");
		x = proc_hold_get(h, 7, &f->cfg->layouts[0]);
		assert_non_null(x);
		assert_int_equal(x->full, i > 0);
		proc_hold_apply(x, &f->out);
		if (i == 3) /* x is reading 3 (ref 12), judged now */
			break;
		proc_hold_put(x, &pk, &f->r, 5, 10 + i, &f->out);
	}
	assert_int_equal(x->ref, 12);
	assert_int_equal(x->rd.values[S_PH].flag, TP_FLAG_FAIL);
	for (j = 0; j < x->n_tests; j++)
		if (x->test[j].slot == S_PH)
			assert_int_equal(x->test[j].test[TP_QC_SPIKE],
			                 TP_FLAG_FAIL);
	assert_int_equal(proc_hold_n(h), 1);
	assert_ptr_equal(proc_hold_at(h, 0), x);
	assert_null(proc_hold_at(h, 1));
	/* an update naming another ref is not applied */
	x->rd.values[S_PH].flag = TP_FLAG_PASS;
	f->out.update[0].ref = 11;
	f->out.n_updates = 1;
	proc_hold_apply(x, &f->out);
	assert_int_equal(x->rd.values[S_PH].flag, TP_FLAG_PASS);
	/* another station has its own entry */
	assert_ptr_not_equal(proc_hold_get(h, 8, &f->cfg->layouts[0]), x);
	assert_int_equal(proc_hold_n(h), 2);
	proc_hold_free(h);
}

/* The update record: one JSON object per run of updates naming one id,
 * with the new flags and the spike judgements; a second id starts a new
 * record.  Parsed back with cJSON (an independent JSON reader). */
static void test_update_json(void **state)
{
	struct proc_update u[3] = {
	    {"st-1-2-0", 1, 10, 4, "ph", TP_FLAG_FAIL, TP_FLAG_FAIL},
	    {"st-1-2-0", 1, 10, 5, "oxygen", TP_FLAG_SUSPECT, TP_FLAG_SUSPECT},
	    {"st-\"q\"", 2, 20, 4, "ph", TP_FLAG_PASS, TP_FLAG_PASS}};
	struct buf b;
	cJSON *j, *x;

	(void)state;
	buf_init(&b, 4096);
	assert_int_equal(process_update_json(&b, u, 3), 2);
	j = cJSON_Parse(buf_str(&b));
	assert_non_null(j);
	assert_string_equal(cJSON_GetObjectItem(j, "update")->valuestring,
	                    "st-1-2-0");
	x = cJSON_GetObjectItem(j, "flags");
	assert_int_equal(cJSON_GetObjectItem(x, "ph")->valueint, 4);
	assert_int_equal(cJSON_GetObjectItem(x, "oxygen")->valueint, 3);
	x = cJSON_GetObjectItem(cJSON_GetObjectItem(j, "tests"), "oxygen");
	assert_int_equal(cJSON_GetObjectItem(x, "spike")->valueint, 3);
	cJSON_Delete(j);
	buf_reset(&b);
	assert_int_equal(process_update_json(&b, u + 2, 1), 1);
	j = cJSON_Parse(buf_str(&b));
	assert_non_null(j); /* the quote in the id is escaped */
	assert_string_equal(cJSON_GetObjectItem(j, "update")->valuestring,
	                    "st-\"q\"");
	cJSON_Delete(j);
	buf_free(&b);
}

/* derive false: no derived values at all. */
static void test_derive_off(void **state)
{
	static const char text[] =
	    "{\"layouts\": [" LAYOUT "], \"stations\": {\"7\":"
	    " {\"name\": \"s7\", \"derive\": false}}}";
	struct config *c = load(text);
	struct process *p;
	struct proc_out *o = calloc(1, sizeof(*o));
	struct tp_reading r;

	(void)state;
	assert_non_null(c);
	assert_non_null(o);
	p = process_new(c);
	reading(&r, 1000, 27.0, 53.0, 8.05, 200.0);
	assert_int_equal(process_reading(p, 7, &c->layouts[0], &r, 1, "a", o),
	                 0);
	assert_int_equal(r.n_values, S_N);
	assert_int_equal(o->plan->n_out, 0);
	process_free(p);
	config_free(c);
	free(o);
}

/* ---- the science keys: placed messages ---------------------------------- */

struct bad_row {
	const char *why;
	const char *station; /* the station object's members */
	const char *path;    /* key path in the message */
	const char *frag;    /* fragment of the message */
};

static const struct bad_row bad_rows[] = {
    /* the peer must be a value some layout (or derivation) has */
    {"unknown peer",
     "\"qc\": {\"ph\": {\"multi_variate\": {\"with\": \"temprature\","
     " \"n_dev\": 3, \"with_n_dev\": 3}}}",
     "stations.7.qc.ph.multi_variate.with", "did you mean \"temperature\""},
    /* a value cannot be its own peer */
    {"self peer",
     "\"qc\": {\"ph\": {\"multi_variate\": {\"with\": \"ph\","
     " \"n_dev\": 3, \"with_n_dev\": 3}}}",
     "stations.7.qc.ph.multi_variate.with", "is the value itself"},
    /* n_dev is required */
    {"peer without n_dev",
     "\"qc\": {\"ph\": {\"multi_variate\": {\"with\": \"temperature\","
     " \"with_n_dev\": 3}}}",
     "stations.7.qc.ph.multi_variate", "n_dev"},
    /* flat_n beyond what the history holds (REP_CNT <= 63) */
    {"flat_n too big", "\"qc\": {\"ph\": {\"flat_n\": 70}}",
     "stations.7.qc.ph.flat_n", "valid: 2..64"},
    /* an unknown boron word lists the valid ones */
    {"boron word", "\"carbonate\": {\"boron\": \"lee\"}",
     "stations.7.carbonate.boron", "lee2010"},
    /* ph_temperature neither number nor value */
    {"ph_temperature type", "\"ph_temperature\": true",
     "stations.7.ph_temperature", "a number -2..40"},
    /* ph_temperature naming no value */
    {"ph_temperature name", "\"ph_temperature\": \"lab_t\"",
     "stations.7.ph_temperature", "unknown value \"lab_t\""},
    /* an unknown input key gets a suggestion */
    {"derive_inputs key", "\"derive_inputs\": {\"temprature\": \"ph\"}",
     "stations.7.derive_inputs", "temperature"},
    /* pressure from a field no layout has: the binding fails for every
     * layout, reported at pressure_from */
    {"pressure_from field", "\"pressure_from\": \"field\"",
     "stations.7.pressure_from", "layout \"t1\": pressure from a field"},
    /* a named input with a unit the formulas cannot use (ph is "1") */
    {"bad unit", "\"derive_inputs\": {\"temperature\": \"ph\"}",
     "stations.7.derive_inputs", "temperature must be in degC"},
    /* pH from a ratio field needs the field's name */
    {"ratio without field", "\"ph_from_ratio\": {\"method\": \"liu2011\"}",
     "stations.7.ph_from_ratio", "field"},
};

static bool has_msg(const struct cfg_errors *e, const char *path,
                    const char *frag)
{
	char want[160];
	size_t i;

	snprintf(want, sizeof(want), ": %s", path);
	for (i = 0; i < e->n; i++)
		if (strncmp(e->msg[i], "t.json:", 7) == 0 &&
		    strstr(e->msg[i], want) != NULL &&
		    strstr(e->msg[i], frag) != NULL)
			return true;
	return false;
}

static void test_bad_keys(void **state)
{
	char text[2048];
	struct cfg_errors e;
	struct config *c;
	size_t i, j;
	int failed = 0;

	(void)state;
	for (i = 0; i < sizeof(bad_rows) / sizeof(bad_rows[0]); i++) {
		snprintf(text, sizeof(text),
		         "{\"layouts\": [" LAYOUT "],\n\"stations\": {\"7\":"
		         " {\"name\": \"s7\",\n%s}}}",
		         bad_rows[i].station);
		c = NULL;
		if (config_load_buffer("t.json", text, strlen(text), ".", &c,
		                       &e) == 0) {
			fprintf(stderr, "row \"%s\": loaded\n",
			        bad_rows[i].why);
			config_free(c);
			failed++;
			continue;
		}
		if (!has_msg(&e, bad_rows[i].path, bad_rows[i].frag)) {
			fprintf(stderr, "row \"%s\": want %s ... %s\n",
			        bad_rows[i].why, bad_rows[i].path,
			        bad_rows[i].frag);
			for (j = 0; j < e.n; j++)
				fprintf(stderr, "  %s\n", e.msg[j]);
			failed++;
		}
		cfg_errors_free(&e);
	}
	assert_int_equal(failed, 0);
}

/* Good keys fill the structs: words, numbers, names. */
static void test_good_keys(void **state)
{
	static const char text[] =
	    "{\"layouts\": [" LAYOUT "], \"stations\": {\"7\":"
	    " {\"name\": \"s7\", \"depth_m\": 3, \"expect_every_s\": 600,"
	    " \"carbonate\": {\"boron\": \"lee2010\","
	    " \"kf\": \"dickson-riley1979\"},"
	    " \"ph_temperature\": 25, \"pressure_from\": \"station_depth\","
	    " \"alkalinity\": {\"value\": 2300},"
	    " \"qc\": {\"ph\": {\"flat_n\": 5, \"flat_fail_n\": 9,"
	    " \"rate_n_dev\": 3, \"spike\": 0.1},"
	    " \"oxygen\": {\"gap_s\": 5000}}}}}";
	struct config *c = load(text);
	const struct cfg_station *s;

	(void)state;
	assert_non_null(c);
	s = config_station(c, 7);
	assert_non_null(s);
	assert_true(s->derive);
	assert_int_equal(s->derive_cfg.co2.boron, TP_BORON_LKB10);
	assert_int_equal(s->derive_cfg.co2.kf, TP_KF_DR79);
	assert_int_equal(s->derive_cfg.meas_t, TP_MEAS_T_CONSTANT);
	assert_true(s->derive_cfg.meas_t_c == 25);
	assert_int_equal(s->derive_cfg.pressure, TP_PRES_STATION_DEPTH);
	assert_int_equal(s->derive_cfg.alk, TP_ALK_CONSTANT);
	assert_true(s->derive_cfg.alk_umol_kg == 2300);
	assert_int_equal(s->qc[0].base.flat_suspect_n, 4); /* flat_n - 1 */
	assert_int_equal(s->qc[0].base.flat_fail_n, 8);
	assert_int_equal(s->qc[0].base.roc_window_s, 25 * 3600);
	assert_int_equal(s->qc[0].base.gap_s, 1200); /* 2 x 600 */
	assert_true(s->qc[0].base.spike_low == 0.1);
	assert_int_equal(s->qc[1].base.gap_s, 5000);
	config_free(c);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test_setup_teardown(test_derived_values, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(test_qc_before_derive, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(test_derived_qc, setup, teardown),
	    cmocka_unit_test_setup_teardown(test_peer_first, setup, teardown),
	    cmocka_unit_test_setup_teardown(test_spike_update, setup, teardown),
	    cmocka_unit_test_setup_teardown(test_flat_line, setup, teardown),
	    cmocka_unit_test_setup_teardown(test_gap, setup, teardown),
	    cmocka_unit_test_setup_teardown(test_unknown_station, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(test_bad_reading, setup, teardown),
	    cmocka_unit_test_setup_teardown(test_qc_names, setup, teardown),
	    cmocka_unit_test_setup_teardown(test_derived_names, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(test_hold_one, setup, teardown),
	    cmocka_unit_test(test_update_json),
	    cmocka_unit_test(test_derive_off),
	    cmocka_unit_test(test_bad_keys),
	    cmocka_unit_test(test_good_keys),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
