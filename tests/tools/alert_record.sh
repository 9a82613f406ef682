#!/bin/sh
# alert_record.sh OUTDIR [MODE] ... - an exec alert target for tests.
#
# Records what it was started with, byte for byte and without ever
# interpreting it: its argv (/proc/$$/cmdline, NUL-separated), its
# environment (/proc/$$/environ), and its open fds (/proc/$$/fd).
# Files: OUTDIR/PID.argv, PID.env, PID.fds, then OUTDIR/PID.done.
# MODE "hang": write OUTDIR/PID.hang, then sleep (a child, so a kill of
# the process group is needed to end both).  MODE "fail": exit 3.
# Only "$1" and "$2" are ever expanded, and only as words.
out=$1
# find writes the fd list itself (-fprintf): a shell redirection would
# add fds of its own to the list
find /proc/$$/fd/ -mindepth 1 -fprintf "$out/$$.fds" '%f %l\n'
cp /proc/$$/cmdline "$out/$$.argv"
cp /proc/$$/environ "$out/$$.env"
case "$2" in
hang)
	: > "$out/$$.hang"
	sleep 600
	;;
fail)
	: > "$out/$$.done"
	exit 3
	;;
esac
: > "$out/$$.done"
exit 0
