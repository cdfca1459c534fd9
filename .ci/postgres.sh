# .ci/postgres.sh — a throw-away PostgreSQL cluster for the test suite.
#
# Source it (bash) before `go test`:  . .ci/postgres.sh
# It installs the Debian PostgreSQL server if missing, starts a private
# cluster listening only on a Unix socket in a fresh temp directory, creates
# the role and database "tpcscan", exports TPCSCAN_TEST_POSTGRES and stops
# and deletes the cluster when the sourcing shell exits. If
# TPCSCAN_TEST_POSTGRES is already set, it does nothing. It never touches a
# cluster it did not start. Works as root (the server then runs as the
# "postgres" user) or as an ordinary user.
#
# The cluster is thrown away, so by default it skips flushing to disk
# (fsync=off, synchronous_commit=off) to keep the tests quick. Set
# TPCSCAN_PG_DURABLE=1 for production durability settings, e.g. before
# running the benchmarks.

tpcscan_pg_log() { echo "postgres.sh: $*" >&2; }

tpcscan_pg_bindir() {
	local d
	if command -v pg_config >/dev/null 2>&1; then
		d=$(pg_config --bindir 2>/dev/null)
		[ -x "$d/initdb" ] && { echo "$d"; return 0; }
	fi
	d=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -n 1)
	[ -n "$d" ] && [ -x "$d/initdb" ] && { echo "$d"; return 0; }
	return 1
}

tpcscan_pg_start() {
	local bindir dir runas=()
	if ! bindir=$(tpcscan_pg_bindir); then
		if [ "$(id -u)" -ne 0 ]; then
			tpcscan_pg_log "PostgreSQL is not installed and we are not root; PostgreSQL tests will skip"
			return 0
		fi
		tpcscan_pg_log "installing PostgreSQL from Debian packages"
		export DEBIAN_FRONTEND=noninteractive
		apt-get update -q </dev/null >&2 &&
			apt-get install -y -q --no-install-recommends postgresql </dev/null >&2 || {
			tpcscan_pg_log "apt-get install postgresql failed"; return 1; }
		bindir=$(tpcscan_pg_bindir) || { tpcscan_pg_log "no initdb after install"; return 1; }
	fi

	dir=$(mktemp -d "${TMPDIR:-/tmp}/tpcscan-pg.XXXXXX") || return 1
	if [ "$(id -u)" -eq 0 ]; then
		# initdb refuses to run as root: hand the directory to "postgres".
		id postgres >/dev/null 2>&1 || useradd --system --no-create-home postgres || return 1
		chown postgres "$dir"
		runas=(runuser -u postgres --)
	fi
	chmod 700 "$dir"

	if ! "${runas[@]}" "$bindir/initdb" -D "$dir/data" -U postgres --auth=trust \
		--encoding=UTF8 --locale=C.UTF-8 --no-sync >"$dir/initdb.log" 2>&1 </dev/null; then
		cat "$dir/initdb.log" >&2; tpcscan_pg_log "initdb failed"; return 1
	fi
	# No TCP listener at all: only a socket in our private directory, so
	# trust authentication is reachable by no one else.
	local opts="-c listen_addresses='' -c unix_socket_directories='$dir' -c max_connections=200"
	if [ "${TPCSCAN_PG_DURABLE:-0}" != 1 ]; then
		opts="$opts -c fsync=off -c synchronous_commit=off -c full_page_writes=off"
	fi
	if ! "${runas[@]}" "$bindir/pg_ctl" -D "$dir/data" -l "$dir/server.log" -w -t 60 -o "$opts" \
		start >/dev/null </dev/null; then
		cat "$dir/server.log" >&2; tpcscan_pg_log "pg_ctl start failed"; return 1
	fi
	TPCSCAN_PG_DIR=$dir
	TPCSCAN_PG_STOP=("${runas[@]}" "$bindir/pg_ctl" -D "$dir/data" -m fast -w stop)

	local psql=("${runas[@]}" "$bindir/psql" -h "$dir" -U postgres -d postgres -v ON_ERROR_STOP=1 -q)
	"${psql[@]}" -c "CREATE ROLE tpcscan LOGIN" -c "CREATE DATABASE tpcscan OWNER tpcscan" </dev/null || {
		tpcscan_pg_log "creating role and database failed"; return 1; }
	export TPCSCAN_TEST_POSTGRES="postgres://tpcscan@localhost/tpcscan?host=$dir&sslmode=disable"
	tpcscan_pg_log "cluster up in $dir; TPCSCAN_TEST_POSTGRES=$TPCSCAN_TEST_POSTGRES"
}

tpcscan_pg_stop() {
	[ -n "${TPCSCAN_PG_DIR:-}" ] || return 0
	"${TPCSCAN_PG_STOP[@]}" >/dev/null 2>&1 </dev/null || tpcscan_pg_log "pg_ctl stop failed"
	rm -rf "$TPCSCAN_PG_DIR"
	unset TPCSCAN_PG_DIR TPCSCAN_TEST_POSTGRES
}

if [ -z "${TPCSCAN_TEST_POSTGRES:-}" ]; then
	if tpcscan_pg_start; then
		# Chain onto whatever EXIT trap the sourcing script already set
		# (trap -p prints it shell-quoted, so eval gets it back verbatim).
		tpcscan_pg_prev_trap=
		eval "tpcscan_pg_prev_trap=$(trap -p EXIT | sed -e 's/^trap -- //' -e 's/ EXIT$//')"
		trap 'tpcscan_pg_stop; eval "${tpcscan_pg_prev_trap:-:}"' EXIT
	else
		tpcscan_pg_log "could not start PostgreSQL; PostgreSQL tests will skip"
		tpcscan_pg_stop
	fi
fi
