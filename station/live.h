/* live: the live station's loop, `station run` (station/cmd_run.c parses
 * its options into struct live_options).
 *
 * The loop runs on the main thread: it takes frames from the source
 * (station/source.h) with a short timeout, feeds the trigger
 * (station/trigger.h), draws the operator screen (station/screen.h; none
 * with headless) and hands a copy of each triggered frame to the
 * inspection worker (station/worker.h), which owns the inspector and the
 * log.  A verdict is shown (screen, JSON line on stdout) only when the
 * worker posts it, after its record is durable.  One trigger can wait while
 * the worker is busy; a further one is dropped with a note, except in
 * continuous mode, where the waiting frame is replaced by the newest.  A
 * replay at fps 0 is read no faster than the worker inspects, so every file
 * is inspected.  The log failing halts inspection (screen, event line)
 * until the worker's retry succeeds.  Camera lost: the screen says so, and
 * the part in view (auto, continuous) or a key trigger meanwhile gets a
 * NO_VERDICT record with rule camera_lost; a frozen camera likewise gets
 * rule frozen, and a stalled one (no new frame for 500 ms, or five frame
 * periods when longer: a stream that stopped, or garbled buffers the camera
 * source skips) rule camera_stalled, with events camera_stalled and
 * camera_streaming.  Operator id and serial come from the options, the screen's
 * input line or stdin commands, and go into each record; the serial is
 * cleared once the inspection it was logged with has its result (a serial
 * belongs to one part).  Headless: JSON lines on stdout (each inspection's
 * report with log_seq and latency_ms; events {"event": ...}), commands on
 * stdin lines: "" or "inspect", "serial S", "operator ID", "relearn",
 * "quit" (end of input with the key trigger quits too); quitting so first
 * finishes the inspection asked for (one asked before the first frame takes
 * that frame), for at most 10 s.  A signal (SIGINT, SIGTERM) finishes only
 * the record in hand.
 *
 * Forwarding (sync_to set): a forwarder thread (station/forwarder.h) sends
 * the log to the central database in the background; its outcomes are event
 * lines {"event": "synced", "records", "held"} and {"event": "sync_failed",
 * "reason", "retry_s"}, and the screen's status line ends in the central
 * copy's state.  Inspection never waits on it.
 *
 * Capture mode (capture_dir set, `station capture`): the same source,
 * trigger and screen, but no worker, no model and no log: each trigger
 * (key, or the automatic part trigger) saves the frame into the dataset
 * folder (station/capture.h) and prints {"event": "saved", "path", "count",
 * "frame"}; the screen shows CAPTURE, the count and the last file.
 * inspections then counts saved frames. */
#ifndef ST_LIVE_H
#define ST_LIVE_H

#include "source.h"

struct live_options {
    const char *recipe_path;
    const char *source;          /* spec, default "bench" */
    struct source_options src;
    int headless;
    const char *db_path, *station, *operator_id, *serial;
    int trigger;                 /* enum recipe_trigger_mode; -1: the recipe's [trigger] mode */
    long inspections;            /* stop after this many results; 0: no limit */
    long frames;                 /* stop after this many frames; 0: no limit */
    const char *snapshot;        /* PNG of the screen after each shown verdict (and F12) */
    int allow_offscreen;         /* tests: SDL's offscreen and dummy drivers are accepted */
    double budget_mb;
    int retry_ms;                /* log retries while halted */
    const char *capture_dir;     /* capture mode: save triggered frames here */
    const char *sync_to;         /* forward the log to this central database (forwarder.h) */
    const char *sync_line;       /* the station's production line there; NULL: as held */
    double sync_every;           /* seconds between syncs; 0: FORWARDER_EVERY_DEFAULT */
};
void live_options_init(struct live_options *o);

/* The options station run and station capture share, by the getopt codes
 * both give them: 'S' --source, 'H' --headless, 'f' --fps, 'z' --size,
 * 'd' --seed, 'F' --frames, 'o' --snapshot, 'A' --allow-offscreen.
 * Returns 1 when c was one of them and its value was good, -1 (having said
 * why) when its value was bad, 0 when c is not one of them. */
int live_parse_option(int c, const char *arg, struct live_options *o);
/* Options that cannot go together; says why and returns -1. */
int live_options_check(const struct live_options *o);

/* The exit status: 0 all PASS, 1 any FAIL, 2 any NO_VERDICT, 3 error. */
int live_run(const struct live_options *o);

#endif
