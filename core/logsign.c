#include "logsign.h"

#include <ctype.h>
#include <errno.h>
#include <fcntl.h>
#include <inttypes.h>
#include <sodium.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

_Static_assert(LOGSIGN_SK_BYTES == crypto_sign_SECRETKEYBYTES, "libsodium secret key size");
_Static_assert(LOGSIGN_PK_HEX == 2 * crypto_sign_PUBLICKEYBYTES + 1, "public key size");
_Static_assert(LOGSIGN_SIG_HEX == 2 * crypto_sign_BYTES + 1, "signature size");

static int read_all(int fd, unsigned char *p, size_t len)
{
    size_t got = 0;
    while (got < len) {
        ssize_t n = read(fd, p + got, len - got);
        if (n < 0 && errno == EINTR)
            continue;
        if (n <= 0)
            return -1;
        got += (size_t)n;
    }
    unsigned char extra;
    return read(fd, &extra, 1) == 0 ? 0 : -1;
}

static int create_key(const char *path, struct logsign_key *k, struct err *e)
{
    unsigned char pk[crypto_sign_PUBLICKEYBYTES];
    crypto_sign_keypair(pk, k->sk);
    int fd = open(path, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0600);
    if (fd < 0)
        return err_set(e, ST_EIO, "%s: cannot create the signing key: %s", path,
                       strerror(errno));
    int ok = write(fd, k->sk, sizeof k->sk) == (ssize_t)sizeof k->sk && fsync(fd) == 0;
    int err_no = errno;
    if (close(fd) != 0)
        ok = 0;
    if (!ok) {
        unlink(path);
        return err_set(e, ST_EIO, "%s: cannot write the signing key: %s", path,
                       strerror(err_no));
    }
    return ST_OK;
}

int logsign_key_load(const char *path, int create, struct logsign_key *k, int *created,
                     struct err *e)
{
    *created = 0;
    if (sodium_init() < 0)
        return err_set(e, ST_ELIB, "%s: libsodium cannot start", path);
    int fd = open(path, O_RDONLY | O_CLOEXEC | O_NOFOLLOW);
    if (fd < 0 && errno == ENOENT && create) {
        int rc = create_key(path, k, e);
        *created = !rc;
        return rc;
    }
    if (fd < 0)
        return err_set(e, ST_EIO, "%s: cannot open the signing key: %s", path, strerror(errno));
    struct stat st;
    int rc = ST_OK;
    if (fstat(fd, &st) != 0 || !S_ISREG(st.st_mode))
        rc = err_set(e, ST_EFORMAT, "%s: the signing key is not a regular file", path);
    else if (st.st_mode & (S_IRWXG | S_IRWXO))
        rc = err_set(e, ST_EIO,
                     "%s: the signing key has mode %04o, others may read it; refused (chmod 600"
                     " it, and if anyone else could have read it, start a new log)",
                     path, (unsigned)(st.st_mode & 07777));
    else if (read_all(fd, k->sk, sizeof k->sk) != 0)
        rc = err_set(e, ST_EFORMAT, "%s: the signing key is not %d bytes", path,
                     LOGSIGN_SK_BYTES);
    close(fd);
    if (rc)
        logsign_key_wipe(k);
    return rc;
}

void logsign_key_wipe(struct logsign_key *k)
{
    sodium_memzero(k->sk, sizeof k->sk);
}

void logsign_public_hex(const struct logsign_key *k, char hex[LOGSIGN_PK_HEX])
{
    unsigned char pk[crypto_sign_PUBLICKEYBYTES];
    crypto_sign_ed25519_sk_to_pk(pk, k->sk);
    sodium_bin2hex(hex, LOGSIGN_PK_HEX, pk, sizeof pk);
}

void logsign_sign(const struct logsign_key *k, const char *msg, char sig[LOGSIGN_SIG_HEX])
{
    unsigned char s[crypto_sign_BYTES];
    crypto_sign_detached(s, NULL, (const unsigned char *)msg, strlen(msg), k->sk);
    sodium_bin2hex(sig, LOGSIGN_SIG_HEX, s, sizeof s);
}

static int unhex(const char *hex, unsigned char *bin, size_t len)
{
    size_t got = 0;
    if (!hex || strlen(hex) != 2 * len ||
        sodium_hex2bin(bin, len, hex, 2 * len, NULL, &got, NULL) != 0 || got != len)
        return -1;
    return 0;
}

int logsign_verify(const char *pk_hex, const char *msg, const char *sig_hex)
{
    unsigned char pk[crypto_sign_PUBLICKEYBYTES], s[crypto_sign_BYTES];
    if (sodium_init() < 0 || unhex(pk_hex, pk, sizeof pk) || unhex(sig_hex, s, sizeof s))
        return ST_EFORMAT;
    return crypto_sign_verify_detached(s, (const unsigned char *)msg, strlen(msg), pk) == 0
               ? ST_OK
               : ST_EFORMAT;
}

static int is_key_hex(const char *s)
{
    size_t n = 0;
    while (isxdigit((unsigned char)s[n]))
        n++;
    return n == LOGSIGN_PK_HEX - 1 && s[n] == '\0';
}

int logsign_public_parse(const char *arg, char hex[LOGSIGN_PK_HEX], struct err *e)
{
    char text[LOGSIGN_PK_HEX + 64] = "";
    const char *s = arg;
    if (!is_key_hex(arg)) {
        FILE *f = fopen(arg, "r");
        if (!f)
            return err_set(e, ST_EIO, "%s: not 64 hex characters, and cannot open it as a file: %s",
                           arg, strerror(errno));
        size_t n = fread(text, 1, sizeof text - 1, f);
        fclose(f);
        text[n] = '\0';
        s = text;
        while (isspace((unsigned char)*s))
            s++;
        char *end = text + strlen(text);
        while (end > s && isspace((unsigned char)end[-1]))
            *--end = '\0';
        if (!is_key_hex(s))
            return err_set(e, ST_EFORMAT, "%s: does not hold a public key (64 hex characters)",
                           arg);
    }
    for (int i = 0; i < LOGSIGN_PK_HEX - 1; i++)
        hex[i] = (char)tolower((unsigned char)s[i]);
    hex[LOGSIGN_PK_HEX - 1] = '\0';
    return ST_OK;
}

void logsign_statement(const char *pk_hex, const int64_t from[3],
                       char out[LOGSIGN_STATEMENT_MAX])
{
    snprintf(out, LOGSIGN_STATEMENT_MAX,
             "station-log signing 1\npublic_key=%s\nrecord=%" PRId64 "\ndisposition=%" PRId64
             "\nverification=%" PRId64 "\n",
             pk_hex, from[0], from[1], from[2]);
}
