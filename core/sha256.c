#include "sha256.h"

#include <errno.h>
#include <nettle/sha2.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

static void to_hex(struct sha256_ctx *ctx, char hex[SHA256_HEX_LEN])
{
    uint8_t d[SHA256_DIGEST_SIZE];
    sha256_digest(ctx, sizeof d, d);
    for (size_t i = 0; i < sizeof d; i++)
        snprintf(hex + 2 * i, 3, "%02x", d[i]);
}

void sha256_hex_buffer(const void *data, size_t len, char hex[SHA256_HEX_LEN])
{
    struct sha256_ctx ctx;
    sha256_init(&ctx);
    sha256_update(&ctx, len, data);
    to_hex(&ctx, hex);
}

int sha256_hex_file(const char *path, char hex[SHA256_HEX_LEN], struct err *e)
{
    FILE *f = fopen(path, "rb");
    if (!f)
        return err_set(e, ST_EIO, "%s: cannot open: %s", path, strerror(errno));
    struct sha256_ctx ctx;
    sha256_init(&ctx);
    uint8_t buf[65536];
    size_t got;
    while ((got = fread(buf, 1, sizeof buf, f)) > 0)
        sha256_update(&ctx, got, buf);
    int bad = ferror(f);
    fclose(f);
    if (bad)
        return err_set(e, ST_EIO, "%s: read error", path);
    to_hex(&ctx, hex);
    return ST_OK;
}
