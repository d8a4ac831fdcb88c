#include "cli.h"

#include "core/recipe.h"

#include <errno.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

void cli_say(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    fputs("station: ", stderr);
    vfprintf(stderr, fmt, ap);
    fputc('\n', stderr);
    va_end(ap);
}

void cli_emit(json_t *o)
{
    json_dumpf(o, stdout, JSON_COMPACT | JSON_REAL_PRECISION(6));
    fputc('\n', stdout);
    fflush(stdout);
    json_decref(o);
}

double cli_now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec * 1e3 + ts.tv_nsec / 1e6;
}

void cli_sleep_ms(double ms)
{
    if (ms <= 0)
        return;
    struct timespec ts = {(time_t)(ms / 1e3), (long)((ms - (double)(time_t)(ms / 1e3) * 1e3) * 1e6)};
    while (nanosleep(&ts, &ts) != 0 && errno == EINTR)
        ;
}

void progress_init(struct progress *p)
{
    p->tty = isatty(STDERR_FILENO);
    p->last_ms = -1e9;
}

void progress_update(struct progress *p, int force, const char *fmt, ...)
{
    double t = cli_now_ms();
    /* a log file gets a line every few seconds, a terminal ten a second */
    double every = p->tty ? 100 : 5000;
    if (!force && t - p->last_ms < every)
        return;
    p->last_ms = t;
    va_list ap;
    va_start(ap, fmt);
    if (p->tty)
        fputs("\r\033[K", stderr);
    vfprintf(stderr, fmt, ap);
    if (!p->tty)
        fputc('\n', stderr);
    va_end(ap);
    fflush(stderr);
}

void progress_done(struct progress *p)
{
    if (p->tty)
        fputc('\n', stderr);
}

int cli_wants_help(int argc, char **argv)
{
    for (int i = 1; i < argc; i++)
        if (strcmp(argv[i], "-h") == 0 || strcmp(argv[i], "--help") == 0)
            return 1;
    return 0;
}

int cli_load_recipe(const char *path, struct recipe *r)
{
    struct err e;
    err_clear(&e);
    if (recipe_load(path, r, &e) != ST_OK) {
        cli_say("%s", e.msg);
        return EXIT_ERROR;
    }
    return 0;
}

int cli_number(const char *opt, const char *v, double *out, int zero_ok)
{
    char *end;
    *out = strtod(v, &end);
    if (*end || end == v || !(*out > 0 || (zero_ok && *out == 0))) {
        cli_say("%s: '%s' is not a %s number", opt, v, zero_ok ? "non-negative" : "positive");
        return -1;
    }
    return 0;
}

int cli_size(const char *opt, const char *v, int *w, int *h)
{
    if (sscanf(v, "%dx%d", w, h) != 2 || *w < 64 || *h < 64 || *w > 8192 || *h > 8192) {
        cli_say("%s: '%s' is not WxH with sides 64..8192", opt, v);
        return -1;
    }
    return 0;
}

int cli_split(const char *opt, const char *v, double *out)
{
    char *end;
    *out = strtod(v, &end);
    if (*end || end == v || !(*out > 0 && *out <= 0.9)) {
        cli_say("%s: '%s' is not a share of the images in (0, 0.9]", opt, v);
        return -1;
    }
    return 0;
}
