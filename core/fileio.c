#include "fileio.h"

#include <errno.h>
#include <fcntl.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

int fileio_read_fd(int fd, const char *path, size_t max, uint8_t **buf, size_t *len,
                   struct err *e)
{
    struct stat st;
    if (fstat(fd, &st) || !S_ISREG(st.st_mode))
        return err_set(e, ST_EIO, "%s: not a regular file", path);
    if ((unsigned long long)st.st_size > max)
        return err_set(e, ST_ERANGE, "%s: %lld bytes, more than the %zu allowed", path,
                       (long long)st.st_size, max);
    size_t n = (size_t)st.st_size;
    *buf = malloc(n ? n : 1);
    if (!*buf)
        return err_set(e, ST_ENOMEM, "%s: out of memory for %zu bytes", path, n);
    size_t got = 0;
    while (got < n) {
        ssize_t r = read(fd, *buf + got, n - got);
        if (r <= 0) {
            if (r < 0 && errno == EINTR)
                continue;
            free(*buf);
            *buf = NULL;
            return err_set(e, ST_EIO, "%s: read failed after %zu of %zu bytes", path, got, n);
        }
        got += (size_t)r;
    }
    *len = n;
    return ST_OK;
}

int fileio_read_path(const char *path, size_t max, uint8_t **buf, size_t *len, struct err *e)
{
    int fd = open(path, O_RDONLY);
    if (fd < 0)
        return err_set(e, ST_EIO, "%s: cannot open: %s", path, strerror(errno));
    int rc = fileio_read_fd(fd, path, max, buf, len, e);
    close(fd);
    return rc;
}
