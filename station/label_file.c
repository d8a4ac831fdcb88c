#include "label_file.h"

#include <errno.h>
#include <fcntl.h>
#include <libgen.h>
#include <limits.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "core/pngio.h"

int label_file_load(const char *path, int w, int h, int nclasses, struct image **out,
                    struct err *e)
{
    int rc = pngio_load_label(path, nclasses, out, e);
    if (rc)
        return rc;
    if ((*out)->w != w || (*out)->h != h) {
        rc = err_set(e, ST_EFORMAT, "%s: label mask is %dx%d but its image is %dx%d", path,
                     (*out)->w, (*out)->h, w, h);
        image_free(*out);
        *out = NULL;
    }
    return rc;
}

static int sync_path(const char *path, int flags, struct err *e)
{
    int fd = open(path, flags);
    if (fd < 0 || fsync(fd) != 0) {
        int er = errno;
        if (fd >= 0)
            close(fd);
        return err_set(e, ST_EIO, "%s: cannot flush to disk: %s", path, strerror(er));
    }
    close(fd);
    return ST_OK;
}

int label_file_save(const char *path, const struct image *mask, struct err *e)
{
    char dir[PATH_MAX], tmp[PATH_MAX + 8];
    if (snprintf(dir, sizeof dir, "%s", path) >= (int)sizeof dir ||
        snprintf(tmp, sizeof tmp, "%s.tmp", path) >= (int)sizeof tmp)
        return err_set(e, ST_EINVAL, "%s: path too long", path);
    char *parent = dirname(dir);
    if (mkdir(parent, 0777) != 0 && errno != EEXIST)
        return err_set(e, ST_EIO, "%s: cannot make the folder: %s", parent, strerror(errno));
    int rc = pngio_save(tmp, mask, 6, e);
    if (!rc && !(rc = sync_path(tmp, O_RDONLY, e)) && rename(tmp, path) != 0)
        rc = err_set(e, ST_EIO, "%s: cannot replace the mask: %s", path, strerror(errno));
    if (rc) {
        unlink(tmp);
        return rc;
    }
    return sync_path(parent, O_RDONLY | O_DIRECTORY, e);
}
