# A throwaway PostgreSQL cluster for the database tests, from the distribution's server
# packages: a temporary folder, an unprivileged server user, a Unix socket in that folder and
# 127.0.0.1 only. Source it, then call `pg_up`; `pg_down` stops the server and removes the
# folder. pg_up exports the URLs the tests read:
#   LOTSHIFT_TEST_POSTGRES_URL     the owner, over the socket (trusted), to set up tables
#   LOTSHIFT_TEST_POSTGRES_READER  a login that may only read, over TCP with a password
#   LOTSHIFT_TEST_POSTGRES_READER_PASSWORD  its password
# The sample lots are loaded into the table hub_measurements.

pg_up() {
  local bin
  bin=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -1)
  if [ -z "$bin" ]; then
    echo "no PostgreSQL server: apt-get install postgresql" >&2
    return 1
  fi
  PG_DIR=$(mktemp -d /tmp/lotshift-pg.XXXXXX)
  PG_PORT=$(( 20000 + RANDOM % 20000 ))
  local as=()
  if [ "$(id -u)" -eq 0 ]; then
    id postgres >/dev/null 2>&1 || useradd --system --no-create-home postgres
    chown postgres "$PG_DIR"
    as=(runuser -u postgres --)
  fi
  "${as[@]}" "$bin/initdb" -D "$PG_DIR/data" -U lotshift_owner --auth-local=trust \
    --auth-host=scram-sha-256 -E UTF8 --locale=C.UTF-8 >"$PG_DIR/initdb.log" 2>&1 || {
    cat "$PG_DIR/initdb.log" >&2
    return 1
  }
  "${as[@]}" "$bin/pg_ctl" -D "$PG_DIR/data" -l "$PG_DIR/server.log" -w \
    -o "-k $PG_DIR -c listen_addresses=127.0.0.1 -p $PG_PORT" start >/dev/null || {
    cat "$PG_DIR/server.log" >&2
    return 1
  }
  PG_BIN=$bin
  PG_AS=("${as[@]}")
  local reader_pw
  reader_pw="ci-$(head -c 12 /dev/urandom | od -An -tx1 | tr -d ' \n')"
  local psql=("$bin/psql" -q -v ON_ERROR_STOP=1 -h "$PG_DIR" -p "$PG_PORT" -U lotshift_owner)
  "${psql[@]}" -d postgres -c "CREATE DATABASE lotshift" >/dev/null
  local root
  root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
  "${psql[@]}" -d lotshift >/dev/null <<SQL
CREATE ROLE lotshift_reader LOGIN PASSWORD '$reader_pw';
CREATE TABLE hub_measurements (
  "route" text, "serial" text, "measured at" text, "operator" text,
  "bore diameter (mm)" double precision, "outer diameter (mm)" double precision,
  "hub length (mm)" double precision, "flange thickness (mm)" double precision,
  "mass (g)" double precision);
\\copy hub_measurements FROM '$root/sample-lots/both-routes.csv' WITH (FORMAT csv, HEADER true, NULL '-')
GRANT SELECT ON hub_measurements TO lotshift_reader;
SQL
  export LOTSHIFT_TEST_POSTGRES_URL="postgresql://lotshift_owner@localhost:$PG_PORT/lotshift?host=$PG_DIR"
  export LOTSHIFT_TEST_POSTGRES_READER="postgresql://lotshift_reader@127.0.0.1:$PG_PORT/lotshift"
  export LOTSHIFT_TEST_POSTGRES_READER_PASSWORD="$reader_pw"
  echo "PostgreSQL $("$bin/postgres" --version | awk '{print $3}') for the tests: $LOTSHIFT_TEST_POSTGRES_URL"
}

pg_down() {
  if [ -n "${PG_DIR:-}" ] && [ -d "$PG_DIR/data" ]; then
    "${PG_AS[@]}" "$PG_BIN/pg_ctl" -D "$PG_DIR/data" -m fast -w stop >/dev/null 2>&1 || true
    rm -rf "$PG_DIR"
  fi
}
