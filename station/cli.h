/* cli: what every subcommand shares — exit statuses, the caution line,
 * messages on stderr, the terminal progress line and the subcommand table.
 *
 * Machine-readable output goes to stdout as JSON lines; everything for a
 * person goes to stderr. */
#ifndef ST_CLI_H
#define ST_CLI_H

#include <jansson.h>
#include <stdio.h>

enum exit_status {
    EXIT_ALL_PASS = 0,   /* every part PASS (or the command succeeded) */
    EXIT_ANY_FAIL = 1,   /* at least one FAIL, none NO_VERDICT */
    EXIT_ANY_NONE = 2,   /* at least one NO_VERDICT */
    EXIT_ERROR = 3,      /* bad input: recipe, model, dataset, option */
    EXIT_USAGE = 4,      /* wrong command line */
    EXIT_REFUSED = 5     /* station sync: a link differs from its central copy (or its own hash) */
};

#define CLI_CAUTION                                                                       \
    "Caution: station aids, and does not replace, qualified inspection and the site's own " \
    "quality procedures."

/* "station: message\n" on stderr. */
void cli_say(const char *fmt, ...) __attribute__((format(printf, 1, 2)));

/* One JSON value as a compact line on stdout, flushed at once (a reader may
 * be waiting on it), then freed. */
void cli_emit(json_t *o);

/* A progress line rewritten in place on a terminal, one line per update
 * (throttled) when stderr is not a terminal. */
struct progress {
    int tty;
    double last_ms;
};
void progress_init(struct progress *p);
void progress_update(struct progress *p, int force, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
void progress_done(struct progress *p);

/* CLOCK_MONOTONIC milliseconds. */
double cli_now_ms(void);
/* Sleeps ms milliseconds (none when ms <= 0), resumed after a signal. */
void cli_sleep_ms(double ms);

/* Subcommands: each returns an exit_status. */
int cmd_train(int argc, char **argv);
int cmd_evaluate(int argc, char **argv);
int cmd_inspect(int argc, char **argv);
int cmd_demo(int argc, char **argv);
int cmd_recipe(int argc, char **argv);
int cmd_bench(int argc, char **argv);
int cmd_calibrate(int argc, char **argv);
int cmd_verify(int argc, char **argv);
int cmd_audit(int argc, char **argv);
int cmd_run(int argc, char **argv);
int cmd_label(int argc, char **argv);
int cmd_capture(int argc, char **argv);
int cmd_sync(int argc, char **argv);

/* Option values: a positive (or, with zero_ok, non-negative) number, and
 * WxH with sides 64..8192; on a bad value they say so naming opt and
 * return -1. */
int cli_number(const char *opt, const char *v, double *out, int zero_ok);
int cli_size(const char *opt, const char *v, int *w, int *h);
/* A held-out share for --split, in (0, 0.9]. */
int cli_split(const char *opt, const char *v, double *out);

/* True when argv holds -h or --help; such commands print usage and return 0. */
int cli_wants_help(int argc, char **argv);

struct recipe;
/* Loads a recipe; on failure prints the one-line reason and returns EXIT_ERROR. */
int cli_load_recipe(const char *path, struct recipe *r);

#endif
