#!/usr/bin/env bash
# Load test of the JSON API on loopback (a benchmark, not a test): builds the release binary,
# starts `massline serve --demo --public-read` on a fresh database with the API rate off,
# warms the fit cache, and runs wrk against
#   1. GET /api/v1/place?…            placing one object (σ, mass, distance, resolution)
#   2. GET /api/v1/relations/m_sigma  reading the M–σ fit
#   3. GET /api/v1/place?…            the same with an API token (each use is looked up and its
#                                     last-used time written, see benches/README.md)
#   4. POST /api/v1/place             a batch of 100 objects with the token
#                                     (benches/api_place_batch.lua)
# The project's targets: ≥ 10,000 requests/s with p99 < 10 ms placing one object, ≥ 10,000
# requests/s reading a fit. Results go in benches/README.md ("The JSON API under load").
#
#   benches/api_load.sh [seconds per run, default 15] [connections, default 32]
#
# Needs wrk (apt-get install -y wrk). The server and wrk share the machine's cores, so the
# figures are a lower bound for a server with the machine to itself.
set -euo pipefail

cd "$(dirname "$0")/.."
SECONDS_PER_RUN="${1:-15}"
CONNECTIONS="${2:-32}"
THREADS="${WRK_THREADS:-2}"
PORT="${PORT:-18490}"
BASE="http://127.0.0.1:${PORT}"

command -v wrk >/dev/null || { echo "wrk is not installed (apt-get install -y wrk)" >&2; exit 1; }
cargo build --release --quiet

WORK="$(mktemp -d)"
SERVER_PID=""
cleanup() {
    if [[ -n "$SERVER_PID" ]]; then kill "$SERVER_PID" 2>/dev/null || true; wait "$SERVER_PID" 2>/dev/null || true; fi
    rm -rf "$WORK"
}
trap cleanup EXIT

RUST_LOG=warn ./target/release/massline serve --demo --public-read --api-rate-per-minute 0 \
    --db "$WORK/bench.sqlite" --bind "127.0.0.1:${PORT}" >"$WORK/server.log" 2>&1 &
SERVER_PID=$!
for _ in $(seq 1 100); do
    curl -fs "$BASE/healthz" >/dev/null 2>&1 && break
    sleep 0.1
done
curl -fs "$BASE/healthz" >/dev/null || { cat "$WORK/server.log"; exit 1; }

PLACE="$BASE/api/v1/place?sigma=210%20%C2%B1%2010&mass=3.2e8%20%2B0.5e8/-0.3e8&distance=16.5%20%C2%B1%200.8&resolution=0.1"
FIT="$BASE/api/v1/relations/m_sigma"
# A read token of the demo member, written straight into the bench database (the token's
# SHA-256 and prefix, as /account stores them).
TOKEN="$(python3 - "$WORK/bench.sqlite" <<'PY'
import hashlib, secrets, sqlite3, sys
prefix = "benchtok"
token = f"ml_{prefix}_{secrets.token_hex(32)}"
db = sqlite3.connect(sys.argv[1])
account = db.execute("select account_id from account where username = 'demo-member'").fetchone()[0]
db.execute(
    "insert into api_token (account_id, label, token_sha256, scopes, prefix) values (?, ?, ?, ?, ?)",
    (account, "load test", hashlib.sha256(token.encode()).hexdigest(), "read", prefix),
)
db.commit()
print(token)
PY
)"
AUTH="Authorization: Bearer ${TOKEN}"

# Warm the fit cache (the first request fits; every later one reads the cached fit).
curl -fs "$PLACE" >/dev/null
curl -fs "$FIT" >/dev/null
curl -fs "$BASE/api/v1/place?bulge_mass=2e11&sigma=200" >/dev/null

echo "massline API load, $(nproc) cores, load average $(cut -d' ' -f1-3 /proc/loadavg), wrk -t${THREADS} -c${CONNECTIONS} -d${SECONDS_PER_RUN}s, $(date -u +%FT%TZ)"
# CPU seconds the server has used so far (user + system), from /proc: the server's cost per
# request does not depend on what else the machine is doing, its throughput does.
server_cpu_s() {
    awk -v hz="$(getconf CLK_TCK)" '{ printf "%.3f", ($14 + $15) / hz }' "/proc/${SERVER_PID}/stat"
}
run() {
    local label="$1"; shift
    echo
    echo "== ${label}"
    local before after out requests
    before="$(server_cpu_s)"
    out="$(wrk -t"${THREADS}" -c"${CONNECTIONS}" -d"${SECONDS_PER_RUN}s" --latency "$@")"
    after="$(server_cpu_s)"
    echo "$out" | grep -E "Requests/sec|Latency |  50%|  90%|  99%|Non-2xx|Socket errors"
    requests="$(echo "$out" | awk '/requests in/ { print $1 }')"
    awk -v b="$before" -v a="$after" -v n="$requests" \
        'BEGIN { printf "  server CPU per request: %.1f µs (%d requests, %.1f CPU s)\n", (a - b) / n * 1e6, n, a - b }'
}
run "place one object: GET /api/v1/place" "$PLACE"
run "read a fit: GET /api/v1/relations/m_sigma" "$FIT"
run "place one object with a token: GET /api/v1/place" -H "$AUTH" "$PLACE"
run "place a batch of 100 with a token: POST /api/v1/place" -H "$AUTH" -s benches/api_place_batch.lua "$BASE/api/v1/place"
