/*
 * cli_run.h - the daemon commands: `tidepost run` (run.c), `tidepost
 * ring` (cmd_ring.c) and `tidepost replay` (cmd_replay.c).  main.c's
 * command table points here.
 *
 * Exit status of `run` (beyond cli.h's 0 / 2):
 *   0  stopped by SIGTERM/SIGINT, or --once with every output drained;
 *   2  usage, a config that does not load, a ring, input or output that
 *      cannot start;
 *   3  --once: some output is not drained (it is backing off, paused or
 *      stopped) or input is left waiting for ring space;
 *   4  the ring failed (fsync error) and could not be recovered: a
 *      service manager should restart us (the PostgreSQL approach: after
 *      a failed fsync nothing cached is trusted; the ring is re-read and
 *      recovered from what is durable at the next start).
 * `ring`: 0 healthy, 1 --verify found problems, 2 usage / cannot open.
 * `replay`: 0 every file was handed over or ingested, 1 some file had no
 * valid packet or was refused (ring full), 2 usage / I/O errors.
 */
#ifndef TIDEPOST_CLI_RUN_H
#define TIDEPOST_CLI_RUN_H

#define RUN_EXIT_UNDRAINED   3
#define RUN_EXIT_RING_FAILED 4

int cmd_run(int argc, char **argv);
int cmd_ring(int argc, char **argv);
int cmd_replay(int argc, char **argv);

extern const char cmd_run_usage[];
extern const char cmd_ring_usage[];
extern const char cmd_replay_usage[];

#endif
