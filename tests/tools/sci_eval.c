/*
 * sci_eval - evaluate libtidepost's seawater, oxygen, carbonate and mCP
 * functions for reference tests (tests/integration/test_gsw_reference.py).
 *
 * Reads one request per line on stdin and writes one answer line per
 * request on stdout, in the same order:
 *   sp C t90 p         practical salinity from C (mS/cm)
 *   c SP t90 p         conductivity (mS/cm) from SP
 *   o2sol SP t90       O2 solubility, umol/kg
 *   o2sol_ml SP t90    O2 solubility, mL/L
 *   rho SP t90         EOS-80 density at p = 0, kg/m3
 *   depth p lat        depth (m) from sea pressure
 *   pres z lat         sea pressure (dbar) from depth
 *   mcp M R SP t90     pH_T from mCP ratio; M is liu or mr18
 *   co2 pH TA SP t90   carbonate system (defaults U74, PF87)
 * Answers: "ok VALUE VALID" (VALID 1 or 0; co2 prints pH DIC pCO2 fCO2
 * CO2 HCO3 CO3 OmegaAr OmegaCa in place of VALUE), "err STATUS" when the
 * library returned a status, "bad LINE: what" for a malformed request.
 * Blank lines and lines starting with '#' are ignored.
 */
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "tidepost/carbonate.h"
#include "tidepost/mcp.h"
#include "tidepost/seawater.h"

#define MAX_ARGS 6

struct req {
	char cmd[16];
	double v[MAX_ARGS];
	int n;        /* numbers parsed */
	char word[8]; /* first argument when it is a word (mcp method) */
};

/* Split line into the command, an optional word and numbers.  Returns
 * false with *why set on a malformed line. */
static bool parse(char *line, struct req *r, const char **why)
{
	char *p = line, *end;
	size_t len;

	r->n = 0;
	r->word[0] = '\0';
	while (*p == ' ' || *p == '\t')
		p++;
	len = strcspn(p, " \t\r\n");
	if (len == 0 || len >= sizeof(r->cmd)) {
		*why = "bad command";
		return false;
	}
	memcpy(r->cmd, p, len);
	r->cmd[len] = '\0';
	p += len;
	for (;;) {
		p += strspn(p, " \t\r\n");
		if (*p == '\0')
			return true;
		if (r->n == MAX_ARGS) {
			*why = "too many arguments";
			return false;
		}
		r->v[r->n] = strtod(p, &end);
		if (end == p) {
			len = strcspn(p, " \t\r\n");
			if (r->n != 0 || r->word[0] != '\0' ||
			    len >= sizeof(r->word)) {
				*why = "not a number";
				return false;
			}
			memcpy(r->word, p, len);
			r->word[len] = '\0';
			p += len;
			continue;
		}
		r->n++;
		p = end;
	}
}

static void answer(enum tp_status s, double v, bool valid)
{
	if (s != TP_OK)
		printf("err %d\n", (int)s);
	else
		printf("ok %.17g %d\n", v, valid ? 1 : 0);
}

static void do_co2(const struct req *r)
{
	struct tp_co2_system y;
	enum tp_status s;

	s = tp_co2_from_ph_ta(r->v[0], r->v[1], r->v[2], r->v[3], NULL, &y);
	if (s != TP_OK) {
		printf("err %d\n", (int)s);
		return;
	}
	printf("ok %.12g %.12g %.12g %.12g %.12g %.12g %.12g %.12g %.12g %d\n",
	       y.ph, y.dic, y.pco2, y.fco2, y.co2, y.hco3, y.co3, y.omega_ar,
	       y.omega_ca, y.valid ? 1 : 0);
}

/* Number of numeric arguments each command takes. */
static int nargs(const char *cmd)
{
	static const struct {
		const char *name;
		int n;
	} tab[] = {
	    {"sp", 3},       {"c", 3},   {"o2sol", 2},
	    {"o2sol_ml", 2}, {"rho", 2}, {"depth", 2},
	    {"pres", 2},     {"mcp", 3}, {"co2", 4},
	};
	size_t i;

	for (i = 0; i < sizeof(tab) / sizeof(tab[0]); i++)
		if (strcmp(cmd, tab[i].name) == 0)
			return tab[i].n;
	return -1;
}

static void do_mcp(const struct req *r)
{
	enum tp_mcp_method m =
	    strcmp(r->word, "mr18") == 0 ? TP_MCP_MR2018 : TP_MCP_LIU2011;
	double v;
	bool ok;
	enum tp_status s = tp_mcp_ph(m, r->v[0], r->v[1], r->v[2], &v, &ok);

	answer(s, v, ok);
}

static void run(const struct req *r)
{
	const char *c = r->cmd;
	const double *a = r->v;
	double v = 0.0;
	bool ok = false;
	enum tp_status s = TP_ERR_ARG;

	if (strcmp(c, "co2") == 0) {
		do_co2(r);
		return;
	}
	if (strcmp(c, "mcp") == 0) {
		do_mcp(r);
		return;
	}
	if (strcmp(c, "sp") == 0)
		s = tp_sp_from_c(a[0], TP_COND_MS_CM, a[1], a[2], &v, &ok);
	else if (strcmp(c, "c") == 0)
		s = tp_c_from_sp(a[0], a[1], a[2], &v, &ok);
	else if (strcmp(c, "o2sol") == 0)
		s = tp_o2_solubility(a[0], a[1], TP_O2SOL_UMOL_KG, &v, &ok);
	else if (strcmp(c, "o2sol_ml") == 0)
		s = tp_o2_solubility(a[0], a[1], TP_O2SOL_ML_L, &v, &ok);
	else if (strcmp(c, "rho") == 0)
		s = tp_sw_rho0(a[0], a[1], &v, &ok);
	else if (strcmp(c, "depth") == 0)
		s = tp_depth_from_p(a[0], a[1], &v, &ok);
	else if (strcmp(c, "pres") == 0)
		s = tp_p_from_depth(a[0], a[1], &v, &ok);
	answer(s, v, ok);
}

int main(void)
{
	char line[512];
	unsigned long lineno = 0;
	struct req r;
	const char *why;

	while (fgets(line, sizeof(line), stdin) != NULL) {
		lineno++;
		if (strchr(line, '\n') == NULL && !feof(stdin)) {
			int ch;

			do
				ch = getchar();
			while (ch != '\n' && ch != EOF);
			printf("bad %lu: line too long\n", lineno);
			continue;
		}
		line[strcspn(line, "\r\n")] = '\0';
		if (line[strspn(line, " \t")] == '\0' || line[0] == '#')
			continue;
		why = "wrong number of arguments";
		if (!parse(line, &r, &why) || nargs(r.cmd) != r.n ||
		    (strcmp(r.cmd, "mcp") == 0) != (r.word[0] != '\0')) {
			printf("bad %lu: %s\n", lineno, why);
			continue;
		}
		run(&r);
	}
	if (fflush(stdout) != 0 || ferror(stdin)) {
		fprintf(stderr, "sci_eval: I/O error\n");
		return 1;
	}
	return 0;
}
