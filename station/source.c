#include "source.h"

#include <errno.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "source_bench.h"
#include "source_camera.h"
#include "source_replay.h"
#include "cli.h"

void source_options_init(struct source_options *o)
{
    memset(o, 0, sizeof *o);
    o->fps = 30;
    o->loop = 0;
    o->seed = 1;
}

int source_open(const char *spec, const struct source_options *o, struct source **out,
                struct err *e)
{
    *out = NULL;
    if (!spec)
        spec = "";
    if (!strncmp(spec, "camera:", 7) && spec[7])
        return source_camera_open(spec + 7, o, out, e);
    if (!strncmp(spec, "replay:", 7) && spec[7])
        return source_replay_open(spec + 7, o, out, e);
    if (!strcmp(spec, "bench"))
        return source_bench_open("", o, out, e);
    if (!strncmp(spec, "bench:", 6))
        return source_bench_open(spec + 6, o, out, e);
    return err_set(e, ST_EINVAL,
                   "source '%s': expected camera:/dev/videoN, replay:DIR or bench[:KEY=VALUE,...]",
                   spec);
}

int source_next(struct source *s, int timeout_ms, struct source_frame *f, int *status,
                struct err *e)
{
    return s->ops->next(s->impl, timeout_ms, f, status, e);
}

const char *source_describe(const struct source *s)
{
    return s->ops->describe(s->impl);
}

const char *source_settings_json(const struct source *s)
{
    return s->ops->settings_json ? s->ops->settings_json(s->impl) : NULL;
}

void source_free(struct source *s)
{
    if (!s)
        return;
    s->ops->free(s->impl);
    free(s);
}

int source_wrap(const struct source_ops *ops, void *impl, struct source **out, struct err *e)
{
    struct source *s = malloc(sizeof *s);
    if (!s) {
        ops->free(impl);
        return err_set(e, ST_ENOMEM, "source: out of memory");
    }
    s->ops = ops;
    s->impl = impl;
    *out = s;
    return ST_OK;
}

int source_pace(struct source_pace *p, double fps, int timeout_ms)
{
    if (fps <= 0)
        return 1;
    double now = cli_now_ms(), period = 1e3 / fps;
    if (p->due_ms <= 0 || now - p->due_ms > period)
        p->due_ms = now; /* late by more than a frame: drop, as a camera does, not catch up */
    double wait = p->due_ms - now;
    if (wait > timeout_ms) {
        cli_sleep_ms(timeout_ms);
        return 0;
    }
    if (wait > 0)
        cli_sleep_ms(wait);
    p->due_ms += period;
    return 1;
}
