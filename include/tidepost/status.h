/*
 * status.h - the status codes every libtidepost function returns.
 *
 * The library never prints or logs; it returns one of these and the caller
 * turns it into words with tp_strerror(), which never returns NULL.
 */
#ifndef TIDEPOST_STATUS_H
#define TIDEPOST_STATUS_H

enum tp_status {
	TP_OK = 0,
	TP_ERR_ARG,    /* a caller passed something impossible */
	TP_ERR_SHORT,  /* the packet is shorter than the layout needs */
	TP_ERR_LENGTH, /* the packet length is not one the layout allows */
	TP_ERR_CHECK,  /* the check value (CRC, sum8, xor8) does not match */
	TP_ERR_MATCH,  /* no layout's match/length tests accept the packet */
	TP_ERR_COUNT,  /* the record count field is out of bounds */
	TP_ERR_LAYOUT, /* the layout itself is inconsistent */
	TP_ERR_SPACE,  /* an output buffer is too small */
	TP_ERR_RANGE,  /* a value cannot be represented (encoding) */
	TP_ERR_FRAME,  /* a broken frame (bad stuffing, odd hex, too long) */
	TP_STATUS_MAX
};

/* A short English description of s; never NULL, even for unknown codes. */
const char *tp_strerror(enum tp_status s);

#endif
