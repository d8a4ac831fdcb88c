#include "evidence.h"

#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

static int fail_errno(struct err *e, const char *path, const char *what, int err_no)
{
    return err_set(e, ST_EIO, "%s: %s: %s", path, what, strerror(err_no));
}

/* fsync of a folder makes the names in it (a new file, a rename) durable. */
static int sync_dir(const struct log_io *io, const char *dir, struct err *e)
{
    int fd = io->open(dir, O_RDONLY | O_DIRECTORY, 0);
    if (fd < 0)
        return fail_errno(e, dir, "cannot open folder", errno);
    int rc = io->fsync(fd) != 0 ? fail_errno(e, dir, "cannot sync folder", errno) : ST_OK;
    io->close(fd);
    return rc;
}

static int make_dir(const struct log_io *io, const char *dir, const char *parent, unsigned mode,
                    struct err *e)
{
    if (mkdir(dir, mode ? mode : 0777) == 0) {
        if (mode && chmod(dir, mode) != 0)
            return fail_errno(e, dir, "cannot set the folder's mode", errno);
        return parent ? sync_dir(io, parent, e) : ST_OK;
    }
    if (errno != EEXIST)
        return fail_errno(e, dir, "cannot create folder", errno);
    return ST_OK;
}

static int write_all(const struct log_io *io, int fd, const char *path, const unsigned char *p,
                     size_t len, struct err *e)
{
    while (len > 0) {
        ssize_t n = io->write(fd, p, len);
        if (n < 0 && errno == EINTR)
            continue;
        if (n <= 0)
            return fail_errno(e, path, "cannot write", n < 0 ? errno : ENOSPC);
        p += n;
        len -= (size_t)n;
    }
    return ST_OK;
}

int evidence_write(const struct log_io *io, const char *root, const char *name,
                   const void *data, size_t len, unsigned mode, struct err *e)
{
    char path[PATH_MAX], tmp[PATH_MAX], dir[PATH_MAX];
    if ((size_t)snprintf(path, sizeof path, "%s/%s", root, name) >= sizeof path ||
        (size_t)snprintf(tmp, sizeof tmp, "%s.tmp", path) >= sizeof tmp)
        return err_set(e, ST_ERANGE, "%s/%s: path too long", root, name);
    char parent[PATH_MAX];
    snprintf(dir, sizeof dir, "%s", path);
    *strrchr(dir, '/') = '\0';
    snprintf(parent, sizeof parent, "%s", root);
    char *slash = strrchr(parent, '/');
    if (slash && slash != parent)
        *slash = '\0';
    else
        snprintf(parent, sizeof parent, "%s", slash ? "/" : ".");
    unsigned dmode = mode ? log_folder_mode(mode) : 0;
    int rc = make_dir(io, root, parent, dmode, e);
    if (!rc && strcmp(dir, root) != 0)
        rc = make_dir(io, dir, root, dmode, e);
    if (rc)
        return rc;
    int fd = io->open(tmp, O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, mode ? mode : 0644);
    if (fd < 0)
        return fail_errno(e, tmp, "cannot create", errno);
    if (mode && fchmod(fd, mode) != 0)
        rc = fail_errno(e, tmp, "cannot set the file's mode", errno);
    if (!rc)
        rc = write_all(io, fd, tmp, data, len, e);
    if (!rc && io->fsync(fd) != 0)
        rc = fail_errno(e, tmp, "cannot sync", errno);
    if (io->close(fd) != 0 && !rc)
        rc = fail_errno(e, tmp, "cannot close", errno);
    if (!rc && io->rename(tmp, path) != 0)
        rc = fail_errno(e, path, "cannot rename into place", errno);
    if (rc) {
        unlink(tmp);
        return rc;
    }
    return sync_dir(io, dir, e);
}

int evidence_check(const char *root, const char *name, const char *sha256, long long bytes,
                   struct err *e)
{
    char path[PATH_MAX], hex[SHA256_HEX_LEN];
    if ((size_t)snprintf(path, sizeof path, "%s/%s", root, name) >= sizeof path)
        return err_set(e, ST_ERANGE, "%s/%s: path too long", root, name);
    struct stat st;
    if (stat(path, &st) != 0)
        return fail_errno(e, path, "evidence file missing", errno);
    if ((long long)st.st_size != bytes)
        return err_set(e, ST_EFORMAT, "%s: size %lld bytes, recorded %lld", path,
                       (long long)st.st_size, bytes);
    int rc = sha256_hex_file(path, hex, e);
    if (rc)
        return rc;
    if (strcmp(hex, sha256) != 0)
        return err_set(e, ST_EFORMAT, "%s: SHA-256 %s, recorded %s", path, hex, sha256);
    return ST_OK;
}
