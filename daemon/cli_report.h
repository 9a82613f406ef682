/*
 * cli_report.h - `tidepost report` (cmd_report.c): an HTML page or a CSV
 * summary of readings over a time range.  main.c's command table points
 * here.
 *
 * Exit status: 0 the report was written; 1 no reading to report (none
 * in the inputs, or none in the range / for the station asked); 2 usage,
 * a config that does not load, an input that cannot be read (the others
 * are still used and the report is still written), or an output error.
 */
#ifndef TIDEPOST_CLI_REPORT_H
#define TIDEPOST_CLI_REPORT_H

int cmd_report(int argc, char **argv);

extern const char cmd_report_usage[];

#endif
