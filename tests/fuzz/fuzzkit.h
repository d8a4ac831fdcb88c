/* fuzzkit: what the libFuzzer harnesses in tests/fuzz/ share.
 *
 * The parsers under test read files by path (that is how outside data
 * reaches them), so each input is written to a file in a private folder
 * made once per process (mkdtemp under $TMPDIR, else /tmp) and removed at
 * exit; nothing else lives there, so a file an input names beside itself
 * (a recipe's model or calibration) is absent, and the path rules of
 * core/recipe.c refuse anything outside it.  Header-only: each harness is
 * one program. */
#ifndef ST_FUZZKIT_H
#define ST_FUZZKIT_H

#include <fcntl.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

static char fuzzkit_dir[256];
static char fuzzkit_file[320];

static void fuzzkit_cleanup(void)
{
    if (fuzzkit_file[0])
        unlink(fuzzkit_file);
    if (fuzzkit_dir[0])
        rmdir(fuzzkit_dir);
}

/* Writes data to DIR/name and returns that path; aborts when it cannot,
 * since a harness that silently tests nothing would be worse. */
static const char *fuzzkit_write(const uint8_t *data, size_t size, const char *name)
{
    if (!fuzzkit_dir[0]) {
        const char *tmp = getenv("TMPDIR");
        snprintf(fuzzkit_dir, sizeof fuzzkit_dir, "%s/station-fuzz-XXXXXX",
                 tmp && tmp[0] ? tmp : "/tmp");
        if (!mkdtemp(fuzzkit_dir)) {
            perror("fuzzkit: mkdtemp");
            abort();
        }
        atexit(fuzzkit_cleanup);
    }
    snprintf(fuzzkit_file, sizeof fuzzkit_file, "%s/%s", fuzzkit_dir, name);
    int fd = open(fuzzkit_file, O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, 0600);
    if (fd < 0) {
        perror(fuzzkit_file);
        abort();
    }
    size_t done = 0;
    while (done < size) {
        ssize_t n = write(fd, data + done, size - done);
        if (n <= 0) {
            perror(fuzzkit_file);
            abort();
        }
        done += (size_t)n;
    }
    close(fd);
    return fuzzkit_file;
}

#endif
