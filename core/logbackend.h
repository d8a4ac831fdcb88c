/* logbackend: the table of functions a log back-end gives core/log.c, which
 * keeps the public API of core/log.h and dispatches every storage call
 * through it.  Two back-ends: core/logsqlite.h (the station's own log, read
 * and written) and core/logcentral.h (the plant's central PostgreSQL
 * database, read only).
 *
 * Every entry has the contract of the core/log.h function of the same name,
 * with the back-end's own handle (what its open returned) as `self`.  A
 * back-end that cannot do something (the central database writes nothing)
 * still fills the entry, refusing with a one-line reason, so log.c never
 * tests for NULL.  Heap results (dispositions, verifications, stations) are
 * freed with the core/log.h functions, so every back-end allocates them with
 * malloc and fills the documented fields only.  Never prints; no state. */
#ifndef ST_LOGBACKEND_H
#define ST_LOGBACKEND_H

#include "log.h"

struct log_ops {
    const char *kind;              /* "sqlite", "postgresql" */
    void (*close)(void *self);
    int (*append)(void *self, const struct log_entry *en, int64_t *seq, struct err *e);
    int (*iter_new)(void *self, const struct log_filter *f, void **it, struct err *e);
    int (*iter_next)(void *it, struct log_record *r, int *have, struct err *e);
    void (*iter_free)(void *it);
    int (*get)(void *self, int64_t seq, struct log_record *r, struct err *e);
    int (*dispositions_get)(void *self, int64_t seq, struct log_disposition **out, int *n,
                            struct err *e);
    int (*record_hash)(void *self, int64_t seq, char hex[SHA256_HEX_LEN], struct err *e);
    int (*dispose)(void *self, int64_t seq, const char *auditor, int disp, const char *comment,
                   int64_t *dseq, struct err *e);
    int (*verification_append)(void *self, struct log_verification *v, struct err *e);
    int (*verification_last)(void *self, const char *station, const char *recipe_id,
                             int recipe_version, const char *model_sha256,
                             struct log_verification *v, int *found, struct err *e);
    int (*verifications_get)(void *self, struct log_verification **out, int *n, struct err *e);
    int (*signing_get)(void *self, struct log_signing *s, struct err *e);
    int (*check_integrity)(void *self, struct err *e);
    /* The folder r's evidence names resolve against (r NULL: the handle's
     * own chain's), written into buf; NULL when this handle has none
     * (evidence not available here). */
    const char *(*evidence_dir)(const void *self, const struct log_record *r, char *buf,
                                size_t len);
    const char *(*path)(const void *self);
    int (*scope)(void *self, const char *station, struct err *e);
    int (*stations_get)(void *self, struct log_station **out, int *n, struct err *e);
    int (*purges_get)(void *self, struct log_purge **out, int *n, struct err *e);
};

#endif
