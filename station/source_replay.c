#include "source_replay.h"

#include <dirent.h>
#include <errno.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "core/pngio.h"
#include "cli.h"

struct replay {
    char dir[PATH_MAX];
    char **names;
    int n, next;
    uint64_t delivered;
    double fps;
    int loop;
    struct source_pace pace;
    struct image *img;
    char describe[PATH_MAX + 64];
};

static int cmp_name(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

static int is_png(const char *name)
{
    size_t n = strlen(name);
    return name[0] != '.' && n > 4 && !strcmp(name + n - 4, ".png");
}

static void replay_free(void *impl)
{
    struct replay *r = impl;
    if (!r)
        return;
    for (int i = 0; i < r->n; i++)
        free(r->names[i]);
    free(r->names);
    image_free(r->img);
    free(r);
}

static int list_folder(struct replay *r, struct err *e)
{
    DIR *d = opendir(r->dir);
    if (!d)
        return err_set(e, ST_EIO, "replay %s: cannot open folder: %s", r->dir, strerror(errno));
    int cap = 0, rc = ST_OK;
    struct dirent *de;
    while ((de = readdir(d)) != NULL) {
        if (!is_png(de->d_name))
            continue;
        if (r->n == cap) {
            int ncap = cap ? 2 * cap : 64;
            char **p = realloc(r->names, (size_t)ncap * sizeof *p);
            if (!p) {
                rc = err_set(e, ST_ENOMEM, "replay %s: out of memory listing files", r->dir);
                break;
            }
            r->names = p;
            cap = ncap;
        }
        if (!(r->names[r->n] = strdup(de->d_name))) {
            rc = err_set(e, ST_ENOMEM, "replay %s: out of memory listing files", r->dir);
            break;
        }
        r->n++;
    }
    closedir(d);
    if (!rc && r->n == 0)
        rc = err_set(e, ST_EFORMAT, "replay %s: no .png files in the folder", r->dir);
    if (!rc)
        qsort(r->names, (size_t)r->n, sizeof *r->names, cmp_name);
    return rc;
}

static int replay_next(void *impl, int timeout_ms, struct source_frame *f, int *status,
                       struct err *e)
{
    struct replay *r = impl;
    if (r->next == r->n && !r->loop) {
        *status = SOURCE_END;
        return ST_OK;
    }
    if (!source_pace(&r->pace, r->fps, timeout_ms)) {
        *status = SOURCE_WAIT;
        return ST_OK;
    }
    if (r->next == r->n)
        r->next = 0;
    char path[PATH_MAX];
    int n = snprintf(path, sizeof path, "%s/%s", r->dir, r->names[r->next++]);
    size_t keep = n < 0 ? 0 : (size_t)n < sizeof f->name ? (size_t)n : sizeof f->name - 1;
    memcpy(f->name, path, keep);
    f->name[keep] = '\0';
    f->t_ms = cli_now_ms();
    image_free(r->img);
    r->img = NULL;
    if (keep < (size_t)n) {
        f->img = NULL;
        *status = SOURCE_BAD;
        err_set(e, ST_ERANGE, "%s: path too long for a frame name", path);
        return ST_OK;
    }
    if (pngio_load_rgb(path, &r->img, e)) {
        f->img = NULL;
        *status = SOURCE_BAD;
        return ST_OK;
    }
    f->img = r->img;
    f->index = r->delivered++;
    *status = SOURCE_FRAME;
    return ST_OK;
}

static const char *replay_describe(void *impl)
{
    return ((struct replay *)impl)->describe;
}

static const struct source_ops replay_ops = {replay_next, replay_describe, NULL, replay_free};

int source_replay_open(const char *dir, const struct source_options *o, struct source **out,
                       struct err *e)
{
    struct replay *r = calloc(1, sizeof *r);
    if (!r)
        return err_set(e, ST_ENOMEM, "replay %s: out of memory", dir);
    struct stat st;
    int n = snprintf(r->dir, sizeof r->dir, "%s/images", dir);
    if (n < 0 || (size_t)n >= sizeof r->dir || stat(r->dir, &st) != 0 || !S_ISDIR(st.st_mode))
        n = snprintf(r->dir, sizeof r->dir, "%s", dir);
    int rc = n < 0 || (size_t)n >= sizeof r->dir
                 ? err_set(e, ST_ERANGE, "replay %s: path too long", dir)
                 : list_folder(r, e);
    if (rc) {
        replay_free(r);
        return rc;
    }
    r->fps = o->fps;
    r->loop = o->loop;
    snprintf(r->describe, sizeof r->describe, "replay %s: %d files, %s, %g fps", r->dir, r->n,
             r->loop ? "looping" : "once", r->fps);
    return source_wrap(&replay_ops, r, out, e);
}
