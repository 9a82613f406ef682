#!/bin/sh
# alert-log.sh LOG EVENT_JSON - the live demo's exec alert target (demo
# data is INVENTED).  The daemon runs it as
#   /bin/sh demo/live/alert-log.sh LOG '{"event": ...}'
# (argv from live.json, the event's JSON appended as the last argument)
# and it appends that JSON as one line to LOG.  No network: it shows the
# alerts even while the demo's HTTP receiver is stopped.
set -eu
[ $# -eq 2 ] || { echo "usage: alert-log.sh LOG EVENT_JSON" >&2; exit 2; }
printf '%s\n' "$2" >>"$1"
