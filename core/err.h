/* err: status codes and the error message that travels with a call.
 *
 * Every fallible function in core/ and calib/ returns an int from enum
 * st_status and, when it fails, fills the caller's struct err with one line
 * that names the file (and line) at fault.  There is no global error buffer:
 * the capture thread and the inspection thread each carry their own.  The
 * library never prints and never exits; the program decides what to show. */
#ifndef ST_ERR_H
#define ST_ERR_H

enum st_status {
    ST_OK = 0,
    ST_EIO,      /* a file or folder could not be opened, read or written */
    ST_EFORMAT,  /* input is malformed: corrupt PNG, bad recipe line, bad model */
    ST_ERANGE,   /* a value is outside what is allowed (size limits, label index) */
    ST_ENOMEM,   /* allocation failed or a size computation would overflow */
    ST_ELIB,     /* an outside library (XGBoost, libpng, ...) reported failure */
    ST_EINVAL    /* the caller passed something inconsistent (a programmer error that is still input) */
};

struct err {
    int code;
    char msg[512];
};

/* Records code and a printf-style message in e (which may be NULL) and
 * returns code, so callers can write `return err_set(e, ST_EIO, ...)`. */
int err_set(struct err *e, int code, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* Empties e. */
void err_clear(struct err *e);

#endif
