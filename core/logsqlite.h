/* logsqlite: the station's own log in SQLite — the back-end behind
 * core/log.h for a file path (core/logbackend.h).  Everything core/log.h
 * says about writing, durability, evidence, retention, signatures and
 * schema upgrades is this back-end's; its tables are in DEVELOPERS.md ("The
 * inspection log").  A local log is one station's chain: its own station is
 * the station field of its latest record (what `station sync` keys it by),
 * it has no production line, and log_scope does not narrow it.
 *
 * Owns the SQLite handle and its prepared statements.  Never prints; no
 * global state; one handle per thread. */
#ifndef ST_LOGSQLITE_H
#define ST_LOGSQLITE_H

#include "logbackend.h"

extern const struct log_ops logsqlite_ops;

/* log_open for a path: *out is the handle logsqlite_ops takes. */
int logsqlite_open(const char *path, int mode, const struct log_options *opt, void **out,
                   struct err *e);

#endif
