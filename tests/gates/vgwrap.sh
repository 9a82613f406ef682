#!/bin/sh
# vgwrap.sh - stands in for a tidepost binary under valgrind memcheck.
# Installed (by tests/gates/valgrind.sh) as symlinks BUILD/vg/tidepost and
# BUILD/vg/tools/NAME, so tests that find tools/ beside $TIDEPOST still
# work; runs the real BUILD/tidepost or BUILD/tools/NAME with the same
# arguments, standard streams and pid.  Each run's report goes to
# $VG_LOGDIR/NAME.PID.log (never to the stderr the tests read); exit 99
# when memcheck found an error or a definite leak.
self=$0
dir=$(dirname "$self")
name=$(basename "$self")
case "$(basename "$dir")" in
tools) real="$dir/../../tools/$name" ;;
*) real="$dir/../$name" ;;
esac
logdir=${VG_LOGDIR:-$dir/logs}
[ "$(basename "$dir")" = tools ] && logdir=${VG_LOGDIR:-$dir/../logs}
supp=""
[ -n "${VG_SUPP:-}" ] && [ -f "$VG_SUPP" ] && supp="--suppressions=$VG_SUPP"
# shellcheck disable=SC2086
exec valgrind --tool=memcheck --error-exitcode=99 --leak-check=full \
	--errors-for-leak-kinds=definite --show-leak-kinds=definite \
	--track-fds=no --num-callers=30 $supp \
	--log-file="$logdir/$name.%p.log" "$real" "$@"
