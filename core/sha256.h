/* sha256: SHA-256 digests of files and buffers, through nettle.
 *
 * Digests are written as 64 lower-case hex characters plus NUL.  Used to pin
 * a model to its recipe and (later) to chain log records. */
#ifndef ST_SHA256_H
#define ST_SHA256_H

#include <stddef.h>

#include "err.h"

#define SHA256_HEX_LEN 65

void sha256_hex_buffer(const void *data, size_t len, char hex[SHA256_HEX_LEN]);
int sha256_hex_file(const char *path, char hex[SHA256_HEX_LEN], struct err *e);

#endif
