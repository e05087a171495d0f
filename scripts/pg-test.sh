#!/usr/bin/env bash
# The fleet store's PostgreSQL tests against a real, throwaway PostgreSQL server.
# Installs PostgreSQL when missing (Debian package `postgresql`), starts a cluster in a temp
# dir listening on 127.0.0.1 only (as a non-root user when run as root: PostgreSQL refuses
# root), runs the `#[ignore]`d PostgreSQL tests with HOLDBACK_PG_URL, and stops the cluster.
set -euo pipefail
cd "$(dirname "$0")/.."
export DEBIAN_FRONTEND=noninteractive

pgbin() { ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -n 1; }
if [[ -z "$(pgbin)" || ! -x "$(pgbin)/initdb" ]]; then
    sudo=()
    [[ $(id -u) -eq 0 ]] || sudo=(sudo)
    "${sudo[@]}" apt-get update -q
    "${sudo[@]}" apt-get install -y -q postgresql
fi
bin=$(pgbin)
port=${HOLDBACK_PG_PORT:-55432}
tmp=$(mktemp -d)
as=()
if [[ $(id -u) -eq 0 ]]; then
    user=holdback-pgtest
    id "$user" >/dev/null 2>&1 || useradd --system --no-create-home --shell /usr/sbin/nologin "$user"
    chown "$user" "$tmp"
    as=(runuser -u "$user" --)
else
    user=$(id -un)
fi
stop() {
    (cd "$tmp" && "${as[@]}" "$bin/pg_ctl" -D "$tmp/data" -m fast -w stop >/dev/null 2>&1) || true
    rm -rf "$tmp"
}
trap stop EXIT
(cd "$tmp" && "${as[@]}" "$bin/initdb" -D "$tmp/data" -A trust -U "$user" -E UTF8 >/dev/null)
(cd "$tmp" && "${as[@]}" "$bin/pg_ctl" -D "$tmp/data" -l "$tmp/server.log" -w \
    -o "-c listen_addresses=127.0.0.1 -p $port -k $tmp -c fsync=off" start >/dev/null)
"$bin/pg_isready" -h 127.0.0.1 -p "$port" >/dev/null
export HOLDBACK_PG_URL="host=127.0.0.1 port=$port user=$user dbname=postgres"
echo "==> PostgreSQL $("$bin/postgres" --version | awk '{print $3}') on 127.0.0.1:$port"
cargo test -p holdback-review --test store --locked -- --ignored postgres
