#include "capture.h"

#include <dirent.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "core/evidence.h"
#include "core/pngio.h"

int capture_open(struct capture *c, const char *dir, struct err *e)
{
    memset(c, 0, sizeof *c);
    if ((size_t)snprintf(c->images, sizeof c->images, "%s/images", dir) >= sizeof c->images)
        return err_set(e, ST_ERANGE, "%s: path too long", dir);
    if (mkdir(dir, 0777) != 0 && errno != EEXIST)
        return err_set(e, ST_EIO, "%s: cannot create folder: %s", dir, strerror(errno));
    if (mkdir(c->images, 0777) != 0 && errno != EEXIST)
        return err_set(e, ST_EIO, "%s: cannot create folder: %s", c->images, strerror(errno));
    DIR *d = opendir(c->images);
    if (!d)
        return err_set(e, ST_EIO, "%s: cannot read folder: %s", c->images, strerror(errno));
    long n = 0;
    for (struct dirent *de; (de = readdir(d));) {
        size_t len = strlen(de->d_name);
        n += len > 4 && !strcmp(de->d_name + len - 4, ".png");
    }
    closedir(d);
    c->next = n + 1;
    return ST_OK;
}

int capture_save(struct capture *c, const struct image *img, char *path, size_t len,
                 struct err *e)
{
    char stamp[32], name[64];
    time_t now = time(NULL);
    struct tm tm;
    gmtime_r(&now, &tm);
    strftime(stamp, sizeof stamp, "%Y%m%d-%H%M%S", &tm);
    for (;; c->next++) {
        snprintf(name, sizeof name, "cap_%s_%04ld.png", stamp, c->next);
        if ((size_t)snprintf(path, len, "%s/%s", c->images, name) >= len)
            return err_set(e, ST_ERANGE, "%s: path too long", c->images);
        /* one capturing station per folder: a name taken is skipped, not replaced */
        if (access(path, F_OK) != 0)
            break;
    }
    unsigned char *png = NULL;
    size_t n = 0;
    int rc = pngio_encode_mem(path, img, 1, &png, &n, e);
    if (!rc)
        rc = evidence_write(log_io_default(), c->images, name, png, n, 0, e);
    free(png);
    if (!rc) {
        c->next++;
        c->saved++;
    }
    return rc;
}
