/* logpurges LOG [STATION]: the evidence purges log_purges_get returns, one
 * "name record_seq utc reason" line each, from a local log or (a
 * connection string and STATION) the central database, so the tests can
 * hold both back-ends to the same list.  Errors exit 3. */
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>

#include "core/log.h"

int main(int argc, char **argv)
{
    if (argc != 2 && argc != 3) {
        fprintf(stderr, "usage: logpurges LOG [STATION]\n");
        return 4;
    }
    struct err e;
    err_clear(&e);
    struct log_db *db;
    struct log_purge *p = NULL;
    int n = 0;
    int rc = log_open(argv[1], LOG_OPEN_READ, NULL, &db, &e);
    if (!rc) {
        rc = (argc == 3 ? log_scope(db, argv[2], &e) : ST_OK) || log_purges_get(db, &p, &n, &e);
        log_close(db);
    }
    if (rc) {
        fprintf(stderr, "logpurges: %s\n", e.msg);
        return 3;
    }
    for (int i = 0; i < n; i++)
        printf("%s %" PRId64 " %s %s\n", p[i].name, p[i].record_seq, p[i].utc, p[i].reason);
    free(p);
    return 0;
}
