/* fileio: a whole file into memory, with a size bound and errors that name
 * the file and the reason (strerror).  The caller frees *buf.  No state. */
#ifndef ST_FILEIO_H
#define ST_FILEIO_H

#include <stddef.h>
#include <stdint.h>

#include "err.h"

/* Reads fd (a regular file, at most max bytes) to its end; path names it in
 * messages.  Does not close fd. */
int fileio_read_fd(int fd, const char *path, size_t max, uint8_t **buf, size_t *len,
                   struct err *e);
/* Opens path and reads it as fileio_read_fd. */
int fileio_read_path(const char *path, size_t max, uint8_t **buf, size_t *len, struct err *e);

#endif
