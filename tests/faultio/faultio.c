/* faultio: an LD_PRELOAD shim for the log fault tests — the N-th write or
 * sync to a file under a folder fails.
 *
 * It interposes write, pwrite, pwrite64, fsync and fdatasync: the calls
 * SQLite's unix VFS makes (Debian's libsqlite3 imports write, pwrite64 and
 * fdatasync) and those the evidence writer makes through struct log_io's
 * defaults, so one counter covers the database, its WAL and the evidence
 * files without a line of test code in the station.  Only calls on a file
 * whose path (from /proc/self/fd) starts with $FAULTIO_DIR count; the
 * station's stdout and stderr never do.
 *
 *   FAULTIO_DIR     the folder whose files count (unset: the shim does nothing)
 *   FAULTIO_AT      the counted call that fails (0 or unset: none fails);
 *                   it fails with EIO (a sync) or ENOSPC (a write)
 *   FAULTIO_STICKY  1: every counted call after it fails too (a dead disk)
 *   FAULTIO_REPORT  a file that gets "calls=N" at exit, and
 *                   "failed=N OP PATH" when the failure happened
 *
 * Kept out of the program (tests/ only; docs: DEVELOPERS.md, "Fault
 * injection"). */
#define _GNU_SOURCE
#include <dlfcn.h>
#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/types.h>
#include <unistd.h>

#define EXPORT __attribute__((visibility("default")))

static atomic_long calls;
static long fail_at = -1;
static int sticky;
static const char *dir;
static size_t dir_len;

__attribute__((constructor)) static void faultio_init(void)
{
    dir = getenv("FAULTIO_DIR");
    dir_len = dir ? strlen(dir) : 0;
    const char *at = getenv("FAULTIO_AT");
    fail_at = at && atol(at) > 0 ? atol(at) : -1;
    const char *st = getenv("FAULTIO_STICKY");
    sticky = st && *st == '1';
}

static void report(const char *fmt, long n, const char *op, const char *path)
{
    const char *rep = getenv("FAULTIO_REPORT");
    if (!rep)
        return;
    static ssize_t (*real_write)(int, const void *, size_t);
    if (!real_write)
        *(void **)&real_write = dlsym(RTLD_NEXT, "write");
    char line[PATH_MAX + 64];
    int len = snprintf(line, sizeof line, fmt, n, op, path);
    int fd = open(rep, O_WRONLY | O_CREAT | O_APPEND | O_CLOEXEC, 0644);
    if (fd >= 0) {
        if (real_write(fd, line, (size_t)len) < 0)
            len = 0;
        close(fd);
    }
}

__attribute__((destructor)) static void faultio_fini(void)
{
    if (dir)
        report("calls=%ld%s%s\n", atomic_load(&calls), "", "");
}

/* 1 when this call on fd must fail (errno set). */
static int faulty(int fd, const char *op, int err_no)
{
    if (!dir || fd <= 2)
        return 0;
    char link[64], path[PATH_MAX];
    snprintf(link, sizeof link, "/proc/self/fd/%d", fd);
    ssize_t n = readlink(link, path, sizeof path - 1);
    if (n < 0)
        return 0;
    path[n] = '\0';
    if (strncmp(path, dir, dir_len) != 0)
        return 0;
    long k = atomic_fetch_add(&calls, 1) + 1;
    if (fail_at < 0 || k < fail_at || (k > fail_at && !sticky))
        return 0;
    if (k == fail_at)
        report("failed=%ld %s %s\n", k, op, path);
    errno = err_no;
    return 1;
}

typedef ssize_t (*write_fn)(int, const void *, size_t);
typedef ssize_t (*pwrite_fn)(int, const void *, size_t, off_t);
typedef ssize_t (*pwrite64_fn)(int, const void *, size_t, off64_t);
typedef int (*sync_fn)(int);

/* The next definition of name (libc's), looked up once. */
#define REAL(name, type)                                                                      \
    static type real;                                                                         \
    if (!real)                                                                                \
    real = (type)dlsym(RTLD_NEXT, name)

EXPORT ssize_t write(int fd, const void *buf, size_t len)
{
    REAL("write", write_fn);
    return faulty(fd, "write", ENOSPC) ? -1 : real(fd, buf, len);
}

EXPORT ssize_t pwrite(int fd, const void *buf, size_t len, off_t off)
{
    REAL("pwrite", pwrite_fn);
    return faulty(fd, "pwrite", ENOSPC) ? -1 : real(fd, buf, len, off);
}

EXPORT ssize_t pwrite64(int fd, const void *buf, size_t len, off64_t off)
{
    REAL("pwrite64", pwrite64_fn);
    return faulty(fd, "pwrite64", ENOSPC) ? -1 : real(fd, buf, len, off);
}

EXPORT int fsync(int fd)
{
    REAL("fsync", sync_fn);
    return faulty(fd, "fsync", EIO) ? -1 : real(fd);
}

EXPORT int fdatasync(int fd)
{
    REAL("fdatasync", sync_fn);
    return faulty(fd, "fdatasync", EIO) ? -1 : real(fd);
}
