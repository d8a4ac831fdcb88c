#include "live.h"

#include <errno.h>
#include <poll.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "capture.h"
#include "cli.h"
#include "core/judge.h"
#include "core/logpg.h"
#include "forwarder.h"
#include "screen.h"
#include "trigger.h"
#include "worker.h"

#define FRAME_TIMEOUT_MS 20
#define CLOSING_MS 10000
/* No new frame for this long (or 5 frame periods at the rate measured, when
 * longer) while the camera is not lost: stalled.  The camera source skips
 * garbled buffers and restarts a stream after [camera] stall_ms, so without
 * this a key trigger would inspect the last good picture, seconds old
 * (found by tests/e2e/test_camera_faults.sh).  Common practice, no source. */
#define STALE_MIN_MS 500.0

static volatile sig_atomic_t stop_signal;

static void on_signal(int sig)
{
    (void)sig;
    stop_signal = 1;
}

struct live {
    const struct live_options *o;
    struct recipe r;
    struct source *src;
    struct trigger *trig;
    struct worker *w;
    struct screen *scr;
    struct screen_state st;
    int mode, headless, paced_by_worker, forget_last;
    struct image *last;          /* the latest frame, for a key trigger and the screen */
    char last_name[256];
    double last_t_ms;
    struct job pending;
    int has_pending;
    int lost, frozen, stalled, ended, halted, quit;
    int closing, key_waiting;    /* closing: finish what was asked, then quit */
    double closing_ms;
    long results, counts[3];
    long frames, frames_window;
    double window_ms, start_ms, first_frame_ms, last_frame_ms;
    double latency_sum;
    long latency_n;
    char line[512];              /* stdin, headless */
    size_t line_len;
    int stdin_open;
    long snapshots;
    struct capture cap;          /* capture mode (o->capture_dir) */
    struct err cap_err;          /* a frame that could not be saved stops capture */
    struct forwarder *fwd;       /* sync_to: background forwarding */
    char sync_state[96];         /* its last outcome, for the status line */
};

static void event(const char *name, const char *key, const char *value)
{
    json_t *o = json_pack("{s:s}", "event", name);
    if (key)
        json_object_set_new(o, key, json_string(value));
    cli_emit(o);
}

static int copy_frame(struct image **dst, const struct image *src)
{
    if (!*dst || (*dst)->w != src->w || (*dst)->h != src->h) {
        image_free(*dst);
        struct err e;
        if (!(*dst = image_new(src->w, src->h, 3, &e)))
            return -1;
    }
    memcpy((*dst)->px, src->px, (size_t)src->w * src->h * 3);
    return 0;
}

/* Who and with which camera settings: what the record carries besides the frame. */
static void fill_record_fields(struct live *L, struct job *j)
{
    const char *cam = source_settings_json(L->src);
    free(j->camera_json);
    j->camera_json = cam ? strdup(cam) : NULL;
    snprintf(j->operator_id, sizeof j->operator_id, "%s", L->st.operator_id);
    snprintf(j->serial, sizeof j->serial, "%s", L->st.serial);
}

static void snapshot(struct live *L);

/* Capture mode: the triggered frame (the latest one) into the dataset. */
static void save_frame(struct live *L)
{
    char path[PATH_MAX];
    if (capture_save(&L->cap, L->last, path, sizeof path, &L->cap_err))
        return;
    L->results++;
    L->st.inspected = L->cap.saved;
    snprintf(L->st.saved, sizeof L->st.saved, "saved %s", path);
    snprintf(L->st.status, sizeof L->st.status, "%s",
             L->mode == RECIPE_TRIGGER_AUTO ? "saved: take the part off" : "saved");
    cli_emit(json_pack("{s:s,s:s,s:I,s:s}", "event", "saved", "path", path, "count",
                       (json_int_t)L->cap.saved, "frame", L->last_name));
    if (L->scr && L->o->snapshot)
        snapshot(L);
    if (L->o->inspections > 0 && L->results >= L->o->inspections)
        L->quit = 1;
}

/* A triggered frame (the latest one) for the worker. */
static void want_inspection(struct live *L)
{
    if (L->o->capture_dir && L->last) {
        save_frame(L);
        return;
    }
    if (L->halted) {
        event("trigger_dropped", "reason", "inspection halted");
        return;
    }
    if (!L->last) {
        L->key_waiting = 1; /* asked before the first frame: inspect that one */
        return;
    }
    if (L->has_pending && (L->pending.kind != JOB_INSPECT || L->mode != RECIPE_TRIGGER_CONTINUOUS)) {
        event("trigger_dropped", "reason", "an inspection is waiting already");
        return;
    }
    struct job *j = &L->pending;
    if (!L->has_pending)
        memset(j, 0, sizeof *j);
    if (copy_frame(&j->frame, L->last)) {
        event("trigger_dropped", "reason", "out of memory for the frame");
        return;
    }
    j->kind = JOB_INSPECT;
    snprintf(j->name, sizeof j->name, "%s", L->last_name);
    j->forget_last = L->forget_last;
    j->t_ms = L->last_t_ms;
    fill_record_fields(L, j);
    L->has_pending = 1;
}

/* A NO_VERDICT record without inspection (camera lost, frozen, unreadable). */
static void want_refusal(struct live *L, const char *name, const char *rule, const char *message)
{
    if (L->o->capture_dir) {
        event("trigger_dropped", "reason", message); /* nothing to save, nothing to log */
        return;
    }
    if (L->halted || L->has_pending) {
        event("trigger_dropped", "reason", L->halted ? "inspection halted" : "busy");
        return;
    }
    struct job *j = &L->pending;
    memset(j, 0, sizeof *j);
    j->kind = JOB_REFUSE;
    snprintf(j->name, sizeof j->name, "%s", name);
    snprintf(j->rule, sizeof j->rule, "%s", rule);
    snprintf(j->message, sizeof j->message, "%s", message);
    j->t_ms = cli_now_ms();
    fill_record_fields(L, j);
    L->has_pending = 1;
}

static void key_trigger(struct live *L)
{
    if (L->lost)
        want_refusal(L, "camera", "camera_lost", "camera lost: no picture to inspect");
    else if (L->frozen)
        want_refusal(L, L->last_name, "frozen", "camera frozen: the picture repeats unchanged");
    else if (L->stalled)
        want_refusal(L, "camera", "camera_stalled", "camera stalled: no new picture to inspect");
    else
        want_inspection(L);
}

/* The part in view when the camera went away gets its record now. */
static void part_in_view_refused(struct live *L, const char *rule, const char *message)
{
    struct trigger_view v;
    trigger_view(L->trig, &v);
    if (L->mode == RECIPE_TRIGGER_CONTINUOUS ||
        (L->mode == RECIPE_TRIGGER_AUTO && v.present && v.armed)) {
        want_refusal(L, L->last_name[0] ? L->last_name : "camera", rule, message);
        trigger_disarm(L->trig);
    }
}

static void set_status(struct live *L)
{
    struct trigger_view v;
    trigger_view(L->trig, &v);
    const char *s = L->halted                  ? "inspection halted"
                    : L->lost                  ? "camera lost"
                    : L->stalled               ? "camera stalled"
                    : L->frozen                ? "camera frozen"
                    : L->has_pending           ? "inspecting"
                    : L->mode == RECIPE_TRIGGER_KEY && L->o->capture_dir ? "press Enter to save the frame"
                    : L->mode == RECIPE_TRIGGER_KEY ? "press Enter to inspect"
                    : !v.learned               ? "learning the empty bench"
                    : v.present && v.armed     ? "part present, waiting for it to lie still"
                    : v.present && L->o->capture_dir ? "saved: take the part off"
                    : v.present                ? "inspected: take the part off"
                                               : "waiting for a part";
    snprintf(L->st.status, sizeof L->st.status, "%s%s%s", s, L->sync_state[0] ? " · " : "",
             L->sync_state);
}

static void take_forwarding(struct live *L)
{
    struct forward_event ev;
    while (L->fwd && forwarder_poll(L->fwd, &ev)) {
        if (ev.kind == FORWARD_SYNCED) {
            cli_emit(json_pack("{s:s,s:I,s:I,s:I,s:I}", "event", "synced", "records",
                               (json_int_t)ev.records, "dispositions", (json_int_t)ev.dispositions,
                               "verifications", (json_int_t)ev.verifications, "held",
                               (json_int_t)ev.held));
            snprintf(L->sync_state, sizeof L->sync_state, "central: %lld held",
                     (long long)ev.held);
        } else {
            cli_emit(json_pack("{s:s,s:s,s:b,s:i}", "event", "sync_failed", "reason", ev.message,
                               "refused", ev.code == ST_EFORMAT, "retry_s", ev.retry_s));
            /* a refusal (a link that differs) needs a person; a server
             * not reached only time */
            snprintf(L->sync_state, sizeof L->sync_state, "central: %s, retry in %d s",
                     ev.code == ST_EFORMAT ? "refused" : "not reached", ev.retry_s);
        }
    }
}

static void snapshot(struct live *L)
{
    if (!L->scr)
        return;
    char path[300];
    if (L->o->snapshot)
        snprintf(path, sizeof path, "%s", L->o->snapshot);
    else
        snprintf(path, sizeof path, "station-snapshot-%03ld.png", ++L->snapshots);
    struct err e;
    err_clear(&e);
    if (screen_draw(L->scr, &L->st, &e) || screen_snapshot(L->scr, path, &e))
        cli_say("%s", e.msg);
}

static void take_result(struct live *L, struct result *res)
{
    double now = cli_now_ms();
    if (res->kind == RESULT_RESUMED) {
        L->halted = 0;
        L->st.halted[0] = '\0';
        json_t *o = json_pack("{s:s,s:I}", "event", "resumed", "log_seq", (json_int_t)res->seq);
        cli_emit(o);
        return;
    }
    L->results++;
    L->counts[res->verdict]++;
    if (res->kind == RESULT_HALTED) {
        L->halted = 1;
        snprintf(L->st.halted, sizeof L->st.halted, "the log failed: %.140s", res->message);
        cli_say("inspection halted: %s", res->message);
    }
    double latency = now - res->t_ms;
    L->latency_sum += latency;
    L->latency_n++;
    json_object_set_new(res->report, "latency_ms", json_real(latency));
    if (L->scr) {
        screen_state_set_report(&L->st, &L->r, res->report);
        image_free((struct image *)L->st.overlay);
        L->st.overlay = res->overlay;
        res->overlay = NULL;
    }
    L->st.inspected++;
    L->st.passed += res->verdict == VERDICT_PASS;
    L->st.failed += res->verdict == VERDICT_FAIL;
    L->st.no_verdict += res->verdict == VERDICT_NONE;
    if (*res->serial && !strcmp(res->serial, L->st.serial))
        L->st.serial[0] = '\0';
    cli_emit(res->report);
    image_free(res->overlay);
    if (res->kind == RESULT_HALTED)
        event("halted", "reason", res->message);
    if (L->scr && L->o->snapshot)
        snapshot(L);
    if (L->o->inspections > 0 && L->results >= L->o->inspections)
        L->quit = 1;
}

static void describe_calibration(struct live *L)
{
    const struct recipe *r = &L->r;
    if (!r->has_calibration) {
        snprintf(L->st.calibration, sizeof L->st.calibration,
                 "recipe scale %.4g x %.4g mm/px, not calibrated", r->mm_per_px_x,
                 r->mm_per_px_y);
        return;
    }
    char made[32];
    calfile_format_time(r->cal.created, made, sizeof made);
    made[10] = '\0';
    double left = r->cal.valid_days - calfile_age_days(&r->cal, time(NULL));
    snprintf(L->st.calibration, sizeof L->st.calibration, "%.4g mm/px, made %s, %s %.0f days",
             r->mm_per_px_x, made, left >= 0 ? "valid" : "EXPIRED", left >= 0 ? left : -left);
}

static void on_frame(struct live *L, const struct source_frame *f)
{
    struct err e;
    err_clear(&e);
    if (L->lost) {
        L->lost = 0;
        L->st.camera_lost = 0;
        trigger_restart(L->trig);
        event("camera_back", NULL, NULL);
    }
    if (L->stalled) {
        L->stalled = 0;
        event("camera_streaming", NULL, NULL);
    }
    if (copy_frame(&L->last, f->img))
        return;
    snprintf(L->last_name, sizeof L->last_name, "%s", f->name);
    L->last_t_ms = f->t_ms;
    L->st.frame = L->last;
    L->frames++;
    L->frames_window++;
    double now = cli_now_ms();
    if (L->frames == 1)
        L->first_frame_ms = now;
    L->last_frame_ms = now;
    if (now - L->window_ms >= 1000) {
        L->st.fps = L->frames_window * 1000.0 / (now - L->window_ms);
        L->frames_window = 0;
        L->window_ms = now;
        describe_calibration(L); /* its days left run down during a shift */
    }
    if (L->o->frames > 0 && L->frames >= L->o->frames)
        L->ended = 1; /* the last frame is still fed: a trigger on it is inspected */
    unsigned ev = 0;
    if (trigger_feed(L->trig, f->img, &ev, &e)) {
        cli_say("%s: %s", f->name, e.msg);
        return;
    }
    if (ev & TRIGGER_LEARNED)
        event("empty_bench_learned", NULL, NULL);
    if (ev & TRIGGER_FROZEN) {
        L->frozen = 1;
        event("camera_frozen", NULL, NULL);
        part_in_view_refused(L, "frozen", "camera frozen: the picture repeats unchanged");
    }
    if (ev & TRIGGER_MOVING) {
        L->frozen = 0;
        event("camera_moving", NULL, NULL);
    }
    if ((ev & TRIGGER_FIRE) || L->key_waiting)
        want_inspection(L);
    L->key_waiting = 0;
}

/* Called while the source has no frame: a stream that stopped is stalled. */
static void check_stalled(struct live *L)
{
    if (L->lost || L->stalled || !L->frames)
        return;
    double stale = L->st.fps > 0 ? 5000.0 / L->st.fps : 0;
    if (cli_now_ms() - L->last_frame_ms < (stale > STALE_MIN_MS ? stale : STALE_MIN_MS))
        return;
    L->stalled = 1;
    event("camera_stalled", "camera", source_describe(L->src));
    part_in_view_refused(L, "camera_stalled", "camera stalled while the part was in view");
}

static void on_lost(struct live *L)
{
    if (L->lost)
        return;
    L->lost = 1;
    L->st.camera_lost = 1;
    event("camera_lost", "camera", source_describe(L->src));
    part_in_view_refused(L, "camera_lost", "camera lost while the part was in view");
}

/* Quit once what was asked for is done (at most CLOSING_MS more). */
static void close_down(struct live *L)
{
    if (!L->closing)
        L->closing_ms = cli_now_ms();
    L->closing = 1;
}

static void command(struct live *L, char *cmd)
{
    size_t n = strlen(cmd);
    while (n && (cmd[n - 1] == '\r' || cmd[n - 1] == ' '))
        cmd[--n] = '\0';
    if (!*cmd || !strcmp(cmd, "inspect"))
        key_trigger(L);
    else if (!strncmp(cmd, "serial ", 7))
        snprintf(L->st.serial, sizeof L->st.serial, "%s", cmd + 7);
    else if (!strncmp(cmd, "operator ", 9))
        snprintf(L->st.operator_id, sizeof L->st.operator_id, "%s", cmd + 9);
    else if (!strcmp(cmd, "relearn"))
        trigger_relearn(L->trig);
    else if (!strcmp(cmd, "quit"))
        close_down(L);
    else
        event("unknown_command", "line", cmd);
}

static void read_stdin(struct live *L)
{
    struct pollfd p = {STDIN_FILENO, POLLIN, 0};
    while (L->stdin_open && poll(&p, 1, 0) > 0) {
        char c;
        ssize_t got = read(STDIN_FILENO, &c, 1);
        if (got < 0 && errno == EINTR)
            continue;
        if (got <= 0) {
            L->stdin_open = 0;
            if (L->mode == RECIPE_TRIGGER_KEY)
                close_down(L); /* no one can ask for an inspection any more */
            return;
        }
        if (c == '\n') {
            L->line[L->line_len] = '\0';
            command(L, L->line);
            L->line_len = 0;
        } else if (L->line_len + 1 < sizeof L->line) {
            L->line[L->line_len++] = c;
        }
    }
}

static void poll_screen(struct live *L)
{
    enum screen_action a;
    while ((a = screen_poll(L->scr, &L->st, 0)) != SCREEN_NONE) {
        if (a == SCREEN_QUIT)
            L->quit = 1;
        else if (a == SCREEN_TRIGGER)
            key_trigger(L);
        else if (a == SCREEN_SNAPSHOT)
            snapshot(L);
        else if (a == SCREEN_RELEARN)
            trigger_relearn(L->trig);
    }
}

static int step(struct live *L, struct err *e)
{
    struct result res;
    while (L->w && worker_poll(L->w, &res))
        take_result(L, &res);
    take_forwarding(L);
    if (L->has_pending && !L->quit && worker_submit(L->w, &L->pending))
        L->has_pending = 0;
    if (L->cap_err.code)
        return err_set(e, L->cap_err.code, "%s", L->cap_err.msg);
    if (L->headless)
        read_stdin(L);
    else
        poll_screen(L);
    if (L->quit || stop_signal)
        return ST_OK;
    int busy = L->w && worker_busy(L->w);
    int waiting = L->paced_by_worker && (L->has_pending || busy);
    if (L->ended || waiting) {
        struct timespec ts = {0, 2000000};
        nanosleep(&ts, NULL);
    } else {
        struct source_frame f;
        int status;
        int rc = source_next(L->src, FRAME_TIMEOUT_MS, &f, &status, e);
        if (rc)
            return rc;
        if (status == SOURCE_FRAME)
            on_frame(L, &f);
        else if (status == SOURCE_LOST)
            on_lost(L);
        else if (status == SOURCE_BAD)
            want_refusal(L, f.name, "unreadable", e->msg);
        else if (status == SOURCE_END)
            L->ended = 1;
        else if (status == SOURCE_WAIT)
            check_stalled(L);
    }
    int idle = !L->has_pending && !L->key_waiting && !busy;
    if ((L->ended || L->closing) && idle)
        L->quit = 1;
    if (L->closing && cli_now_ms() - L->closing_ms > CLOSING_MS)
        L->quit = 1;
    set_status(L);
    if (L->scr) {
        struct err de;
        err_clear(&de);
        if (screen_draw(L->scr, &L->st, &de))
            return err_set(e, de.code, "%s", de.msg);
    }
    return ST_OK;
}

static void summary(struct live *L)
{
    double s = (cli_now_ms() - L->start_ms) / 1e3;
    /* the preview rate from the first frame to the last: opening the
     * source (the bench's first render) is not preview time */
    double span = (L->last_frame_ms - L->first_frame_ms) / 1e3;
    json_t *o = json_pack("{s:s,s:I,s:f,s:f,s:I,s:I,s:I,s:I,s:o}", "event", "summary", "frames",
                          (json_int_t)L->frames, "seconds", s,
                          "fps", span > 0 ? (L->frames - 1) / span : 0.0, "inspections",
                          (json_int_t)L->results, "pass", (json_int_t)L->counts[VERDICT_PASS],
                          "fail", (json_int_t)L->counts[VERDICT_FAIL], "no_verdict",
                          (json_int_t)L->counts[VERDICT_NONE], "latency_ms_mean",
                          L->latency_n ? json_real(L->latency_sum / L->latency_n) : json_null());
    cli_emit(o);
}

void live_options_init(struct live_options *o)
{
    memset(o, 0, sizeof *o);
    source_options_init(&o->src);
    o->source = "bench";
    o->trigger = -1;
}

int live_parse_option(int c, const char *arg, struct live_options *o)
{
    double v;
    char *end;
    switch (c) {
    case 'S': o->source = arg; return 1;
    case 'H': o->headless = 1; return 1;
    case 'o': o->snapshot = arg; return 1;
    case 'A': o->allow_offscreen = 1; return 1;
    case 'f': return cli_number("--fps", arg, &o->src.fps, 1) ? -1 : 1;
    case 'z': return cli_size("--size", arg, &o->src.width, &o->src.height) ? -1 : 1;
    case 'F':
        if (cli_number("--frames", arg, &v, 0))
            return -1;
        o->frames = (long)v;
        return 1;
    case 'd':
        o->src.seed = strtoull(arg, &end, 10);
        if (*end || end == arg) {
            cli_say("--seed: '%s' is not a whole number", arg);
            return -1;
        }
        return 1;
    default: return 0;
    }
}

int live_options_check(const struct live_options *o)
{
    if (o->headless && o->snapshot) {
        cli_say("--snapshot needs the screen: it cannot go with --headless");
        return -1;
    }
    struct err e;
    err_clear(&e);
    if (o->sync_to && logpg_conninfo_check(o->sync_to, &e)) {
        cli_say("--sync-to: %s", e.msg);
        return -1;
    }
    return 0;
}

static int open_all(struct live *L, struct err *e)
{
    const struct live_options *o = L->o;
    L->mode = o->trigger >= 0 ? o->trigger : L->r.trigger.mode;
    struct source_options so = o->src;
    so.r = &L->r;
    int rc = source_open(o->source, &so, &L->src, e);
    if (!rc)
        rc = trigger_new(&L->r.trigger, L->mode, &L->trig, e);
    struct worker_options wo = {o->db_path, o->station, (uint64_t)(o->budget_mb * 1e6),
                                !o->headless, o->retry_ms};
    if (!rc && o->capture_dir)
        rc = capture_open(&L->cap, o->capture_dir, e);
    else if (!rc)
        rc = worker_start(&L->r, &wo, &L->w, e);
    if (!rc && o->sync_to) {
        /* started after the worker, which creates the log the forwarder reads */
        struct forwarder_options fo = {o->sync_to, worker_log_path(L->w), o->station,
                                       o->sync_line, o->sync_every};
        rc = forwarder_start(&fo, &L->fwd, e);
    }
    if (!rc && !o->headless) {
        struct screen_options sopt;
        screen_options_init(&sopt);
        sopt.allow_offscreen = o->allow_offscreen;
        rc = screen_new(&sopt, &L->scr, e);
    }
    return rc;
}

int live_run(const struct live_options *o)
{
    struct live *L = calloc(1, sizeof *L);
    if (!L) {
        cli_say("out of memory");
        return EXIT_ERROR;
    }
    L->o = o;
    L->headless = o->headless;
    L->stdin_open = 1;
    if (cli_load_recipe(o->recipe_path, &L->r)) {
        free(L);
        return EXIT_ERROR;
    }
    screen_state_init(&L->st);
    snprintf(L->st.operator_id, sizeof L->st.operator_id, "%s", o->operator_id ? o->operator_id : "");
    snprintf(L->st.serial, sizeof L->st.serial, "%s", o->serial ? o->serial : "");
    snprintf(L->st.recipe, sizeof L->st.recipe, "%s version %d", L->r.product, L->r.version);
    L->st.capture = o->capture_dir != NULL;
    describe_calibration(L);
    /* frames of a replay are files, not a camera's consecutive frames */
    L->forget_last = !strncmp(o->source, "replay:", 7);
    L->paced_by_worker = L->forget_last && o->src.fps <= 0;
    struct err e;
    err_clear(&e);
    int rc = open_all(L, &e);
    if (!rc) {
        snprintf(L->st.camera, sizeof L->st.camera, "%s", source_describe(L->src));
        snprintf(L->st.trigger, sizeof L->st.trigger, "%s", trigger_mode_name(L->mode));
        struct sigaction sa;
        memset(&sa, 0, sizeof sa);
        sa.sa_handler = on_signal;
        /* restarted, so a signal never cuts a JSON line short mid-write */
        sa.sa_flags = SA_RESTART;
        sigaction(SIGINT, &sa, NULL);
        sigaction(SIGTERM, &sa, NULL);
        cli_say("%s; %s; trigger %s.  %s", L->st.recipe, L->st.camera, L->st.trigger,
                CLI_CAUTION);
        L->start_ms = L->window_ms = cli_now_ms();
        while (!rc && !L->quit && !stop_signal)
            rc = step(L, &e);
    }
    if (rc)
        cli_say("%s", e.msg);
    take_forwarding(L);
    forwarder_stop(L->fwd);
    L->fwd = NULL;
    if (L->w) {
        /* the job in hand is being recorded: its verdict is still shown */
        struct result res;
        while (!L->halted && worker_busy(L->w)) {
            while (worker_poll(L->w, &res))
                take_result(L, &res);
            struct timespec ts = {0, 2000000};
            nanosleep(&ts, NULL);
        }
        fprintf(stderr, "Recorded in %s.\n", worker_log_path(L->w));
        worker_stop(L->w);
    }
    if (L->src)
        summary(L);
    image_free(L->pending.frame);
    free(L->pending.camera_json);
    image_free(L->last);
    image_free((struct image *)L->st.overlay);
    screen_free(L->scr);
    trigger_free(L->trig);
    source_free(L->src);
    long none = L->counts[VERDICT_NONE], fail = L->counts[VERDICT_FAIL];
    if (o->capture_dir && L->src)
        fprintf(stderr, "%ld frames saved in %s.\n", L->cap.saved, L->cap.images);
    else if (L->results)
        fprintf(stderr, "%ld PASS, %ld FAIL, %ld NO VERDICT.  %s\n", L->counts[VERDICT_PASS],
                fail, none, CLI_CAUTION);
    free(L);
    return rc ? EXIT_ERROR : none ? EXIT_ANY_NONE : fail ? EXIT_ANY_FAIL : 0;
}
