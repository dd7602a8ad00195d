#!/usr/bin/env bash
# Plumbline, without Docker.
#   ./docker-free-dev.sh          install what is missing, start PostgreSQL on loopback, migrate, seed the demo (into an empty database, once), serve the app
#   ./docker-free-dev.sh test     the same on a throwaway cluster, then the whole test suite
#   ./docker-free-dev.sh db       only start the dev database (migrated, seeded) and leave it running; stop-db stops it
#   ./docker-free-dev.sh test-db  only start the test cluster and leave it running, for one test file at a time; stop-test-db stops it
# Settings: PORT (app, default 3000), PLUMBLINE_PGPORT (dev database, default 54329; the test cluster uses +1),
#           SMTP_PORT (local fake mail server, default 2525).
set -euo pipefail
cd "$(dirname "$0")"
ROOT=$(pwd)
MODE=${1:-dev}
PG_BIN=/usr/lib/postgresql/15/bin
export PORT=${PORT:-3000}
DEV_PGPORT=${PLUMBLINE_PGPORT:-54329}

log() { printf '\033[1;34m[plumbline]\033[0m %s\n' "$*"; }

as_root() { if [ "$(id -u)" = 0 ]; then "$@"; else sudo "$@"; fi; }

apt_install() {
  local opts=() missing=()
  while [ "${1:-}" != "${1#--}" ]; do opts+=("$1"); shift; done # leading apt-get options, e.g. --no-install-recommends
  for pkg in "$@"; do dpkg -s "$pkg" >/dev/null 2>&1 || missing+=("$pkg"); done
  [ ${#missing[@]} -eq 0 ] && return 0
  log "installing Debian packages: ${missing[*]}"
  as_root apt-get update -qq
  DEBIAN_FRONTEND=noninteractive as_root apt-get install -y -qq "${opts[@]}" "${missing[@]}" >/dev/null
}

install_dependencies() {
  apt_install postgresql-15 postgresql-client-15
  if [ "$MODE" = test ]; then
    # Browser tests use Debian's Chromium (and poppler-utils to read the printed report); reference checks use Debian's R and Python statistics packages.
    apt_install chromium poppler-utils python3-sklearn python3-statsmodels python3-pandas r-base-core r-cran-proc r-cran-mass
    # metafor and mice for the meta-analysis and multiple-imputation checks; without recommends (they pull in
    # hundreds of MB: brms, rstanarm, lme4…)
    apt_install --no-install-recommends r-cran-metafor r-cran-mice
  fi
  local stamp=node_modules/.plumbline-lock
  if [ ! -f "$stamp" ] || ! cmp -s package-lock.json "$stamp"; then
    log "npm ci"
    npm ci --no-audit --no-fund
    cp package-lock.json "$stamp"
  fi
}

# PostgreSQL refuses to run as root: as root, the cluster belongs to the postgres user.
pg_run() { if [ "$(id -u)" = 0 ]; then runuser -u postgres -- "$@"; else "$@"; fi; }

choose_data_root() {
  DATA_ROOT="$ROOT/.data"
  mkdir -p "$DATA_ROOT"
  if [ "$(id -u)" = 0 ] && ! runuser -u postgres -- test -x "$DATA_ROOT"; then
    # A parent folder the postgres user cannot enter (e.g. /root): keep the cluster outside the repo.
    DATA_ROOT="/var/tmp/plumbline-$(printf '%s' "$ROOT" | sha256sum | cut -c1-12)"
    mkdir -p "$DATA_ROOT"
  fi
}

start_cluster() { # name port
  local name=$1 port=$2
  PGDATA_DIR="$DATA_ROOT/$name"
  PGSOCK_DIR="$DATA_ROOT/$name-socket"
  mkdir -p "$PGSOCK_DIR"
  if [ "$(id -u)" = 0 ]; then chown postgres:postgres "$DATA_ROOT" "$PGSOCK_DIR"; fi
  if [ ! -f "$PGDATA_DIR/PG_VERSION" ]; then
    log "creating PostgreSQL cluster in $PGDATA_DIR"
    mkdir -p "$PGDATA_DIR"
    if [ "$(id -u)" = 0 ]; then chown postgres:postgres "$PGDATA_DIR"; fi
    chmod 700 "$PGDATA_DIR"
    pg_run "$PG_BIN/initdb" -D "$PGDATA_DIR" -U postgres --auth=trust --encoding=UTF8 --locale=C.UTF-8 >/dev/null
  fi
  if pg_run "$PG_BIN/pg_ctl" -D "$PGDATA_DIR" status >/dev/null 2>&1; then
    log "PostgreSQL already running on port $port"
  else
    log "starting PostgreSQL on 127.0.0.1:$port"
    pg_run "$PG_BIN/pg_ctl" -D "$PGDATA_DIR" -l "$DATA_ROOT/$name.log" -w -t 60 \
      -o "-h 127.0.0.1 -p $port -k $PGSOCK_DIR -c fsync=$([ "$name" = pg-test ] && echo off || echo on)" start >/dev/null
  fi
  export PGHOST=127.0.0.1 PGPORT=$port PGUSER=postgres
}

stop_cluster() {
  if [ -n "${PGDATA_DIR:-}" ] && pg_run "$PG_BIN/pg_ctl" -D "$PGDATA_DIR" status >/dev/null 2>&1; then
    log "stopping PostgreSQL"
    pg_run "$PG_BIN/pg_ctl" -D "$PGDATA_DIR" -m fast -w stop >/dev/null || true
  fi
}

ensure_database() { # name
  if ! psql -h 127.0.0.1 -p "$PGPORT" -U postgres -tAc "SELECT 1 FROM pg_database WHERE datname='$1'" postgres | grep -q 1; then
    psql -h 127.0.0.1 -p "$PGPORT" -U postgres -qc "CREATE DATABASE $1" postgres
  fi
  export PGDATABASE=$1
}

install_dependencies
choose_data_root

case "$MODE" in
  dev | start)
    start_cluster pg "$DEV_PGPORT"
    CHILD=""
    cleanup() {
      trap - EXIT INT TERM
      set +e
      if [ -n "$CHILD" ]; then
        kill "$CHILD" 2>/dev/null
        wait "$CHILD" 2>/dev/null
      fi
      stop_cluster
    }
    trap cleanup EXIT INT TERM
    ensure_database plumbline
    log "building the client"
    npx vite build --logLevel warn
    log "migrating; seeding the demo if the database is empty"
    npx tsx server/src/demo/seed.ts
    log "Demo password: plumbline-demo-2026 (accounts: admin@, steward@, statistician@, chair@, clinician@demo.test)"
    log "fake SMTP on 127.0.0.1:${SMTP_PORT:-2525}; open http://localhost:$PORT  (Ctrl-C stops the app and the database)"
    # One process (tsx as an import hook, not npx → tsx CLI → node), so stopping the script stops the server too.
    PLUMBLINE_FAKE_SMTP=1 node --import tsx server/src/index.ts &
    CHILD=$!
    wait "$CHILD"
    ;;
  db)
    # Only the dev database, left running (for `npm run dev` / trying things): stop with `./docker-free-dev.sh stop-db`.
    start_cluster pg "$DEV_PGPORT"
    ensure_database plumbline
    npx tsx server/src/demo/seed.ts
    log "PostgreSQL is up: PGHOST=127.0.0.1 PGPORT=$DEV_PGPORT PGDATABASE=plumbline PGUSER=postgres (the owner; the app connects as plumbline_app)"
    ;;
  stop-db)
    PGDATA_DIR="$DATA_ROOT/pg"
    stop_cluster
    ;;
  test-db)
    # The test cluster alone, left running: prints the settings for `npx vitest run --project api <file>`.
    start_cluster pg-test "$((DEV_PGPORT + 1))"
    ensure_database plumbline_test
    log "run one file with:"
    echo "PGHOST=127.0.0.1 PGPORT=$PGPORT PGUSER=postgres PGDATABASE=plumbline_test PLUMBLINE_TEST=1 PORT=${TEST_APP_PORT:-3100} SMTP_PORT=${TEST_SMTP_PORT:-2625} PLUMBLINE_BCRYPT_COST=10 PLUMBLINE_UPLOAD_DIR=$DATA_ROOT/uploads-test npx vitest run --project api <file>"
    ;;
  stop-test-db)
    PGDATA_DIR="$DATA_ROOT/pg-test"
    stop_cluster
    ;;
  test)
    export CI=${CI:-}
    TEST_PGPORT=$((DEV_PGPORT + 1))
    # A throwaway cluster, new for every run.
    PGDATA_DIR="$DATA_ROOT/pg-test"
    if pg_run "$PG_BIN/pg_ctl" -D "$PGDATA_DIR" status >/dev/null 2>&1; then
      pg_run "$PG_BIN/pg_ctl" -D "$PGDATA_DIR" -m immediate -w stop >/dev/null || true
    fi
    rm -rf "$PGDATA_DIR"
    trap stop_cluster EXIT INT TERM
    start_cluster pg-test "$TEST_PGPORT"
    ensure_database plumbline_test
    export PLUMBLINE_TEST=1 PORT=${TEST_APP_PORT:-3100} SMTP_PORT=${TEST_SMTP_PORT:-2625}
    export PLUMBLINE_BCRYPT_COST=10
    # A temp folder of this run's own: another Plumbline on the machine never adds files to it or sweeps it.
    export PLUMBLINE_UPLOAD_DIR="$DATA_ROOT/uploads-test"
    rm -rf "$PLUMBLINE_UPLOAD_DIR"
    bash server/scripts/run-tests.sh
    ;;
  *)
    echo "usage: $0 [dev|test|db|stop-db|test-db|stop-test-db]" >&2
    exit 2
    ;;
esac
