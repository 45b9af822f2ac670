#!/usr/bin/env bash
# The service at survey scale (a benchmark, not a test). For each size N (galaxies; three rows
# each: σ, black-hole mass, bulge mass) it
#   1. writes an invented catalog with benches/scale/make_catalog.py, plus PENDING more
#      galaxies for the review queue;
#   2. imports the catalog with `massline import FILE --accept` into RUNS fresh databases,
#      timing each, then into the last one the pending galaxies as submissions of member1
#      (`massline import PENDING --as member1`, timed);
#   3. starts `massline serve --public-read` on that database RUNS times and times the first
#      complete M–σ page after the start (the page is polled until it answers 200 without the
#      word "computing"), then waits until the server's log says the version's analysis is
#      done (default fits, review scores, influence lists) and records how long that took;
#   4. times (median of RUNS requests) the cached M–σ page, a galaxy page, the review queue
#      (logged in as reviewer1 through the login form) and one placement through the API, and
#      reads the server's peak resident memory (VmHWM in /proc/PID/status).
# It prints one markdown table; results go in benches/README.md ("Scale").
#
#   benches/scale/run.sh [N ...]            default: 1000 10000 100000
#   RUNS=3 PENDING=10000 MAX_TIME=300 FIRST_WAIT=900 benches/scale/run.sh 20000
#
# A request that takes longer than MAX_TIME seconds, or does not answer 200, counts as n/a; so
# does a first relation page not complete FIRST_WAIT seconds after the start. KEEP_LOG=FILE
# keeps the servers' log (SERVER_LOG=info logs when each version's analysis is done).
#
# Needs python3 (standard library) and curl. Only URLs are used, never the pages' content,
# except the login form's hidden anti-forgery field and the word "computing"; the analysis
# times come from the server's own log lines ("default fits and review scores ready",
# "catalog version analysed"), which the script always enables.
set -euo pipefail

cd "$(dirname "$0")/../.."
ROOT="$PWD"
SIZES=("$@")
[[ ${#SIZES[@]} -gt 0 ]] || SIZES=(1000 10000 100000)
RUNS="${RUNS:-3}"
PENDING="${PENDING:-10000}"
MAX_TIME="${MAX_TIME:-300}"
FIRST_WAIT="${FIRST_WAIT:-900}"
BIN="$ROOT/target/release/massline"

cargo build --release --quiet

WORK="$(mktemp -d)"
SERVER_PID=""
stop_server() {
    if [[ -n "$SERVER_PID" ]]; then
        kill "$SERVER_PID" 2>/dev/null || true
        wait "$SERVER_PID" 2>/dev/null || true
        SERVER_PID=""
    fi
}
cleanup() {
    stop_server
    [[ -z "${KEEP_LOG:-}" ]] || cp "$WORK/server.log" "$KEEP_LOG" 2>/dev/null || true
    rm -rf "$WORK"
}
trap cleanup EXIT

now() { date +%s.%N; }
# seconds between two `now` readings, 2 decimals
elapsed() { python3 -c "import sys; print(f'{float(sys.argv[2]) - float(sys.argv[1]):.2f}')" "$1" "$2"; }
# the median of the arguments, and all of them: "1.20 (1.18, 1.20, 1.31)"
median() {
    python3 - "$@" <<'PY'
import math, statistics, sys
v = [float(a) for a in sys.argv[1:]]
known = [x for x in v if not math.isnan(x)]
if not known:
    print("n/a")
else:
    runs = ", ".join(f"{x:.3g}" for x in v)
    print(f"{statistics.median(known):.3g} ({runs})")
PY
}
free_port() {
    python3 -c "import socket; s = socket.socket(); s.bind(('127.0.0.1', 0)); print(s.getsockname()[1])"
}
# the time of one request in milliseconds; fails unless it answers 200
request_ms() {
    local out code t
    out="$(curl -s -o /dev/null --max-time "$MAX_TIME" -w '%{http_code} %{time_total}' "${@}")" || true
    code="${out%% *}"
    t="${out##* }"
    [[ "$code" == 200 ]] || { echo "HTTP $code from ${*: -1}" >&2; return 1; }
    python3 -c "import sys; print(f'{float(sys.argv[1]) * 1000:.1f}')" "$t"
}
start_server() {
    local db="$1" port="$2"
    RUST_LOG="${SERVER_LOG:-warn},massline::relations::version_analysis=info" "$BIN" serve --public-read --db "$db" --bind "127.0.0.1:$port" \
        --page-rate-per-minute 0 --api-rate-per-minute 0 >>"$WORK/server.log" 2>&1 &
    SERVER_PID=$!
}
# Start the server on database $1 and set FIRST_S to the seconds from its start to the first
# complete relation page, and BASE to its address (no command substitution: the server must
# stay this shell's child).
first_page() {
    local db="$1" port t0 code
    port="$(free_port)"
    BASE="http://127.0.0.1:$port"
    LOG_FROM=1
    [[ ! -f "$WORK/server.log" ]] || LOG_FROM=$(($(wc -l <"$WORK/server.log") + 1))
    t0="$(now)"
    start_server "$db" "$port"
    local deadline=$((SECONDS + FIRST_WAIT))
    while ((SECONDS < deadline)); do
        code="$(curl -s -o "$WORK/page.html" --max-time "$FIRST_WAIT" -w '%{http_code}' \
            "$BASE/relations/m_sigma" || true)"
        if [[ "$code" == 200 ]] && ! grep -qi computing "$WORK/page.html"; then
            FIRST_S="$(elapsed "$t0" "$(now)")"
            return 0
        fi
        if ! kill -0 "$SERVER_PID" 2>/dev/null; then
            echo "the server stopped; the end of its log:" >&2
            tail -n 5 "$WORK/server.log" >&2
            exit 1
        fi
        sleep 0.05
    done
    echo "no complete relation page after $FIRST_WAIT s" >&2
    FIRST_S=nan
}

# Wait until the server started by `first_page` logs that its catalog version is analysed;
# set READY_S and ANALYSED_S to the seconds the analysis took to the default fits and review
# scores, and to its end (from the log's took_ms), or nan after FIRST_WAIT seconds.
wait_analysis() {
    local deadline=$((SECONDS + FIRST_WAIT)) line
    while ((SECONDS < deadline)); do
        line="$(tail -n +"$LOG_FROM" "$WORK/server.log" | grep -m1 'catalog version analysed' || true)"
        if [[ -n "$line" ]]; then
            ANALYSED_S="$(sed -n 's/.*took_ms=\([0-9]*\).*/\1/p' <<<"$line" |
                python3 -c "import sys; print(f'{int(sys.stdin.read()) / 1000:.2f}')")"
            READY_S="$(tail -n +"$LOG_FROM" "$WORK/server.log" |
                grep -m1 'default fits and review scores ready' |
                sed -n 's/.*took_ms=\([0-9]*\).*/\1/p' |
                python3 -c "import sys; t = sys.stdin.read().strip(); print(f'{int(t) / 1000:.2f}' if t else 'nan')")"
            return 0
        fi
        sleep 0.1
    done
    echo "the analysis did not finish within $FIRST_WAIT s" >&2
    READY_S=nan
    ANALYSED_S=nan
}

ROWS=()
for n in "${SIZES[@]}"; do
    dir="$WORK/n$n"
    mkdir -p "$dir"
    python3 benches/scale/make_catalog.py "$n" "$dir/catalog.csv" \
        --pending "$PENDING" "$dir/pending.csv"
    imports=()
    for run in $(seq 1 "$RUNS"); do
        db="$dir/run$run.sqlite"
        rm -f "$db" "$db-wal" "$db-shm"
        t0="$(now)"
        "$BIN" import "$dir/catalog.csv" --accept --db "$db" >"$dir/import.log" 2>&1 ||
            { cat "$dir/import.log" >&2; exit 1; }
        imports+=("$(elapsed "$t0" "$(now)")")
        echo "N=$n import $run: ${imports[-1]} s" >&2
    done
    "$BIN" user add member1 --role member --generate --db "$db" >/dev/null
    password="$("$BIN" user add reviewer1 --role reviewer --generate --db "$db" |
        sed -n 's/.*(shown only now): //p')"
    t0="$(now)"
    "$BIN" import "$dir/pending.csv" --as member1 --db "$db" >"$dir/pending.log" 2>&1 ||
        { cat "$dir/pending.log" >&2; exit 1; }
    pending_s="$(elapsed "$t0" "$(now)")"
    echo "N=$n pending import: $pending_s s" >&2

    firsts=() readies=() analysed=()
    for run in $(seq 1 "$RUNS"); do
        first_page "$db"
        firsts+=("$FIRST_S")
        echo "N=$n first relation page $run: ${firsts[-1]} s" >&2
        wait_analysis
        readies+=("$READY_S")
        analysed+=("$ANALYSED_S")
        echo "N=$n analysis $run: fits and scores ${READY_S} s, done ${ANALYSED_S} s" >&2
        [[ $run == "$RUNS" ]] || stop_server
    done
    base="$BASE"
    slug="$(python3 -c "
import sqlite3, sys
print(sqlite3.connect(sys.argv[1]).execute('select slug from galaxy order by galaxy_id limit 1').fetchone()[0])" "$db")"
    place="$base/api/v1/place?sigma=210%20%C2%B1%2010&mass=3.2e8%20%2B0.5e8/-0.3e8&distance=16.5%20%C2%B1%200.8&resolution=0.1"

    # The reviewer's browser session: the login form's anti-forgery field, then the form.
    jar="$dir/cookies"
    csrf="$(curl -s -c "$jar" -b "$jar" "$base/login" |
        sed -n 's/.*name="csrf" value="\([^"]*\)".*/\1/p' | head -n 1)"
    curl -s -o /dev/null -c "$jar" -b "$jar" --data-urlencode "csrf=$csrf" \
        --data-urlencode "username=reviewer1" --data-urlencode "password=$password" \
        --data-urlencode "next=/review" "$base/login"

    cached=() galaxy=() review=() placed=()
    for _ in $(seq 1 "$RUNS"); do
        cached+=("$(request_ms "$base/relations/m_sigma" || echo nan)")
        galaxy+=("$(request_ms "$base/galaxies/$slug" || echo nan)")
        review+=("$(request_ms -b "$jar" "$base/review" || echo nan)")
        placed+=("$(request_ms "$place" || echo nan)")
    done
    hwm_kb="$(sed -n 's/^VmHWM:[[:space:]]*\([0-9]*\) kB/\1/p' /proc/"$SERVER_PID"/status)"
    stop_server

    ROWS+=("| $n | $((3 * n)) | $(median "${imports[@]}") | $pending_s | $(median "${firsts[@]}") | $(median "${readies[@]}") | $(median "${analysed[@]}") | $(median "${cached[@]}") | $(median "${galaxy[@]}") | $(median "${review[@]}") | $(median "${placed[@]}") | $((hwm_kb / 1024)) |")
done

echo
echo "| galaxies | rows | import --accept, s | $PENDING pending galaxies --as member1, s | first M–σ page after start, s | analysis: fits and review scores, s | analysis done, s | cached M–σ page, ms | galaxy page, ms | /review, ms | GET /api/v1/place, ms | server peak RSS, MiB |"
echo "|---|---|---|---|---|---|---|---|---|---|---|---|"
printf '%s\n' "${ROWS[@]}"
echo
echo "median of $RUNS (every run in brackets); $(date -u +%Y-%m-%d), $(nproc) cores, load average $(cut -d' ' -f1-3 /proc/loadavg)"
