/*
 * status.c - words for enum tp_status (see tidepost/status.h).
 *
 * The strings are short, lower-case and without a final period so callers
 * can put them after "what: where: " in a log line.
 */
#include "tidepost/status.h"

const char *tp_strerror(enum tp_status s)
{
	switch (s) {
	case TP_OK:
		return "success";
	case TP_ERR_ARG:
		return "invalid argument";
	case TP_ERR_SHORT:
		return "packet shorter than the layout needs";
	case TP_ERR_LENGTH:
		return "packet length not allowed by the layout";
	case TP_ERR_CHECK:
		return "check value mismatch";
	case TP_ERR_MATCH:
		return "no layout matches the packet";
	case TP_ERR_COUNT:
		return "record count out of bounds";
	case TP_ERR_LAYOUT:
		return "inconsistent layout";
	case TP_ERR_SPACE:
		return "output buffer too small";
	case TP_ERR_RANGE:
		return "value cannot be represented";
	case TP_ERR_FRAME:
		return "broken frame";
	case TP_STATUS_MAX:
		break;
	}
	return "unknown status";
}
