# Sourced by the tests that need a PostgreSQL server: a throwaway cluster of
# their own, from Debian's postgresql package, that nothing outside can reach.
#
#   pgcluster_start DIR   initdb in DIR/data, start it listening only on a Unix
#                         socket in DIR/sock (listen_addresses = ''), create the
#                         database "central"; sets and exports
#                           PGCLUSTER_CONNINFO  host=DIR/sock port=... user=... dbname=central
#                           PGCLUSTER_URI       the same as a postgresql:// URI
#                           PGPASSFILE          DIR/pgpass (0600): the only place the password is
#                         Run as root in a folder the postgres user cannot reach (a clone under a
#                         0700 home or mktemp -d), the cluster lives in a fresh folder under
#                         ${TMPDIR:-/tmp} instead, named in DIR/where
#   pgcluster_stop        fast shutdown (waits)
#   pgcluster_cleanup     pgcluster_stop, then removes such a folder (the tests' EXIT trap)
#   pgcluster_kill        immediate shutdown: what a cut connection or a crashed server looks like
#   pgcluster_resume      start the same cluster again after a stop or kill
#   pgcluster_pause       SIGSTOP this cluster's postmaster and its own children (a server
#                         or network gone silent); pgcluster_continue undoes it.  Only the
#                         pid in DIR/data/postmaster.pid and its children: other tests may
#                         run clusters of their own as the same user
#   pgcluster_psql SQL    run SQL through psql as the test user, unaligned, tuples only
#
# Authentication is scram-sha-256 with a random password that only the
# PGPASSFILE holds, so a test run exercises the rule that credentials never
# travel on a command line.  Run as root, the server runs as the `postgres`
# system user (PostgreSQL refuses to run as root), through runuser.  When
# PostgreSQL is not installed the sourcing test exits 77 (skip); any other
# failure is a failure.
PGCLUSTER_USER=station_test
PGCLUSTER_PORT=5432
PGCLUSTER_BIN=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -n 1)
if [ -z "$PGCLUSTER_BIN" ] || [ ! -x "$PGCLUSTER_BIN/initdb" ]; then
    echo "SKIP PostgreSQL is not installed (Debian package postgresql)"
    exit 77
fi

pgcluster_as() {
    if [ "$(id -u)" = 0 ]; then
        runuser -u postgres -- "$@"
    else
        "$@"
    fi
}

pgcluster_start() {
    PGCLUSTER_DIR=$(cd "$1" && pwd)
    PGCLUSTER_TMP=""
    if [ "$(id -u)" = 0 ]; then
        # the server's user must reach DIR; it gets the data folder and socket only
        chmod o+x "$PGCLUSTER_DIR"
        if ! runuser -u postgres -- test -x "$PGCLUSTER_DIR"; then
            PGCLUSTER_TMP=$(mktemp -d "${TMPDIR:-/tmp}/station-pg.XXXXXX")
            chmod 0711 "$PGCLUSTER_TMP"
            echo "$PGCLUSTER_TMP" >"$PGCLUSTER_DIR/where"
            PGCLUSTER_DIR=$PGCLUSTER_TMP
        fi
    fi
    rm -rf "$PGCLUSTER_DIR/data" "$PGCLUSTER_DIR/sock"
    mkdir -p "$PGCLUSTER_DIR/data" "$PGCLUSTER_DIR/sock"
    chmod 0700 "$PGCLUSTER_DIR/data"
    pw=$(od -An -N16 -tx1 /dev/urandom | tr -d ' \n')
    pwfile="$PGCLUSTER_DIR/data.pw"
    printf '%s\n' "$pw" >"$pwfile"
    if [ "$(id -u)" = 0 ]; then
        chown postgres "$PGCLUSTER_DIR/data" "$PGCLUSTER_DIR/sock" "$pwfile"
    fi
    chmod 0600 "$pwfile"
    pgcluster_as "$PGCLUSTER_BIN/initdb" -D "$PGCLUSTER_DIR/data" -U "$PGCLUSTER_USER" \
        --auth=scram-sha-256 --pwfile="$pwfile" -E UTF8 --locale=C >"$PGCLUSTER_DIR/initdb.log" 2>&1 || {
        tail -n 5 "$PGCLUSTER_DIR/initdb.log"
        echo "FAIL initdb of the test cluster in $PGCLUSTER_DIR"
        exit 1
    }
    rm -f "$pwfile"
    export PGPASSFILE="$PGCLUSTER_DIR/pgpass"
    printf '*:%s:*:%s:%s\n' "$PGCLUSTER_PORT" "$PGCLUSTER_USER" "$pw" >"$PGPASSFILE"
    chmod 0600 "$PGPASSFILE"
    unset pw
    pgcluster_resume
    PGCLUSTER_CONNINFO="host=$PGCLUSTER_DIR/sock port=$PGCLUSTER_PORT user=$PGCLUSTER_USER dbname=central"
    # libpq URIs take a socket folder as a percent-encoded host
    host=$(printf '%s' "$PGCLUSTER_DIR/sock" | sed 's|%|%25|g; s|/|%2F|g')
    PGCLUSTER_URI="postgresql://$PGCLUSTER_USER@$host:$PGCLUSTER_PORT/central"
    export PGCLUSTER_CONNINFO PGCLUSTER_URI
    "$PGCLUSTER_BIN/psql" -X -q "host=$PGCLUSTER_DIR/sock port=$PGCLUSTER_PORT user=$PGCLUSTER_USER dbname=postgres" \
        -c "CREATE DATABASE central" >/dev/null || {
        echo "FAIL cannot create the database central in the test cluster"
        exit 1
    }
}

pgcluster_resume() {
    pgcluster_as "$PGCLUSTER_BIN/pg_ctl" -D "$PGCLUSTER_DIR/data" -l "$PGCLUSTER_DIR/data/server.log" -w \
        -o "-c listen_addresses='' -c unix_socket_directories='$PGCLUSTER_DIR/sock' -c port=$PGCLUSTER_PORT" \
        start >/dev/null || {
        tail -n 5 "$PGCLUSTER_DIR/data/server.log"
        echo "FAIL the test cluster in $PGCLUSTER_DIR did not start"
        exit 1
    }
}

pgcluster_stop() {
    pgcluster_as "$PGCLUSTER_BIN/pg_ctl" -D "$PGCLUSTER_DIR/data" -m fast -w stop >/dev/null 2>&1 || true
}

pgcluster_cleanup() {
    pgcluster_stop
    if [ -n "${PGCLUSTER_TMP:-}" ]; then
        rm -rf "$PGCLUSTER_TMP"
    fi
}

pgcluster_kill() {
    pgcluster_as "$PGCLUSTER_BIN/pg_ctl" -D "$PGCLUSTER_DIR/data" -m immediate -w stop >/dev/null 2>&1 || true
}

pgcluster_psql() {
    "$PGCLUSTER_BIN/psql" -X -q -At -v ON_ERROR_STOP=1 "$PGCLUSTER_CONNINFO" -c "$1"
}

pgcluster_pids() {
    pm=$(head -n 1 "$PGCLUSTER_DIR/data/postmaster.pid")
    echo "$pm" $(ps -o pid= --ppid "$pm")
}

pgcluster_pause() {
    # the postmaster first, so it starts no child meanwhile
    for p in $(pgcluster_pids); do kill -STOP "$p"; done
}

pgcluster_continue() {
    for p in $(pgcluster_pids); do kill -CONT "$p"; done
}
