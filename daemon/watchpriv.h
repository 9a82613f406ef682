/*
 * watchpriv.h - the watchdog's inside, shared by its three files and by
 * nothing else: watch.c (alert life cycle, timer, outputs, ring,
 * readers), watchst.c (a station's readings: battery, trend, QC streaks,
 * clock) and watchfile.c (the state file).  See watch.h for the contract.
 *
 * Invariants: al[0..n_al) are the open alerts, at most one per
 * (cond, subject, field); st[i].cfg == &cfg->stations[i]; a station's
 * silent_open / an output's down_open mirror whether that alert is open.
 */
#ifndef TIDEPOST_WATCHPRIV_H
#define TIDEPOST_WATCHPRIV_H

#include "watch.h"

#define WATCH_MSG_MAX     240
#define WATCH_SUBJECT_MAX 32 /* station and output names (config.h) */

struct walert {
	enum watch_cond cond;
	char subject[WATCH_SUBJECT_MAX + 1]; /* station, output or "ring" */
	char field[WATCH_NAME_MAX + 1];      /* "" when none */
	char id[160];
	int64_t since_s;     /* real time the condition began */
	int64_t sent_s;      /* real time of the last raise or repeat */
	int64_t repeat_mono; /* next repeat due */
	double value, threshold, rate;
	int64_t forecast_s;
	char msg[WATCH_MSG_MAX];
};

/* A value name's latest reading and its QC streak counters. */
struct wval {
	char name[WATCH_NAME_MAX + 1];
	double v;
	int flag;
	uint32_t bad_run, good_run;
};

struct wstation {
	const struct cfg_station *cfg;
	int64_t silent_ms; /* 0: no silence alert */
	int64_t base_mono; /* last reading received (or the start) */
	bool silent_open;
	bool seen;
	int64_t last_time_s, last_recv_s;
	struct wval *vals;       /* n_vals of WATCH_MAX_VALUES, on demand */
	struct watch_value *exp; /* the same for watch_station */
	size_t n_vals;
	double batt[WATCH_MEDIAN_MAX]; /* newest battery values (ring) */
	size_t n_batt, batt_head;
	int64_t *pt_t; /* trend points (ring of TREND_MAX_PTS) */
	double *pt_v;
	size_t n_pts, pt_head;
	int64_t skew[WATCH_SKEW_N]; /* ring of clock skew samples */
	size_t n_skew, skew_head;
	int64_t skew_recv; /* received_s of the newest sample */
	int64_t skew_time; /* newest reading time with that received_s */
	bool has_battery, has_trend;
	double battery_v, rate;
	int64_t forecast_s;
	const char *note;
};

struct wout {
	char name[WATCH_SUBJECT_MAX + 1];
	bool failing, down_open;
	int64_t down_since_s;
	int64_t due_mono; /* output_down due */
	uint64_t backlog;
};

struct watch {
	struct watch_ctx ctx;
	const struct config *cfg;
	const struct clock *clock;
	struct loop_timer timer;
	struct wstation *st;
	size_t n_st;
	struct wout *out;
	size_t n_out;
	struct walert *al;
	size_t n_al, cap_al;
	bool ring_known, ring_full_open;
	uint64_t refused;
	int64_t quiet_due_mono;
	double *work;         /* Theil-Sen pairwise slopes */
	struct trend_pt *pts; /* points of one fit */
	char rbuf[RING_PAYLOAD_MAX + 1];
};

/* What a condition found; copied into the alert. */
struct facts {
	double value, threshold, rate;
	int64_t since_s; /* 0: now */
	int64_t forecast_s;
	char msg[WATCH_MSG_MAX];
};

/* V_BAD opens (or keeps) an alert, V_GOOD closes it, V_HOLD (the
 * hysteresis band) changes neither. */
enum verdict { V_HOLD = 0, V_BAD, V_GOOD };

void watch_judge(struct watch *w, enum watch_cond c, const char *subject,
                 const char *field, enum verdict v, const struct facts *f);
struct walert *watch_find(struct watch *w, enum watch_cond c,
                          const char *subject, const char *field);
struct walert *watch_add(struct watch *w);
void watch_make_id(struct walert *a);
int watch_cond_find(const char *name);
void watch_rearm(struct watch *w);

/* watchfile.c */
void watch_save(struct watch *w);
void watch_restore(struct watch *w);

#endif
