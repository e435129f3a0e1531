#!/usr/bin/env bash
# Load test of `quarry serve` on loopback: POST /v1/rank with 16 concurrent connections.
#
#   benches/http_load.sh [INDEX_DIR] [DURATION] [BODIES] [CONNECTIONS]
#
# Builds the release binary, indexes the demo library (index_fixtures/) unless an index
# folder is given, starts the server on an ephemeral 127.0.0.1 port, and runs wrk (Debian's
# `wrk`: apt-get install wrk) for DURATION (default 20s) with 16 connections on 2 threads,
# each request one of a few goals of the demo library, or, with BODIES, one line after another
# of that file (one JSON request body per line: real goals of the index's library;
# benches/draw_bodies.py draws such a file from `quarry harvest`'s records).
# CONNECTIONS (default 16) sets wrk's concurrent connections (on one thread when 1). QUARRY_LOAD_NO_BUILD=1 skips the
# `cargo build --release` (for a binary built elsewhere: CARGO_TARGET_DIR picks it). Prints wrk's latency distribution
# (median, p99) and requests/s, and the server's resident memory (VmRSS) after loading and
# its peak (VmHWM) after the run. wrk reports any non-2xx answer in its summary. Traffic goes to 127.0.0.1 only, and the run stops by itself.
set -euo pipefail
cd "$(dirname "$0")/.."

duration="${2:-20s}"
bodies="${3:-}"
connections="${4:-16}"
# wrk wants at least one connection per thread.
threads=2
[ "$connections" -ge 2 ] || threads=1
command -v wrk >/dev/null || { echo "wrk is not installed: apt-get install wrk" >&2; exit 1; }

[ -n "${QUARRY_LOAD_NO_BUILD:-}" ] || cargo build --release --quiet
bin="${CARGO_TARGET_DIR:-target}/release/quarry"
work="$(mktemp -d)"
server_pid=""
cleanup() {
    if [ -n "$server_pid" ]; then kill "$server_pid" 2>/dev/null || true; wait "$server_pid" 2>/dev/null || true; fi
    rm -rf "$work"
}
trap cleanup EXIT

if [ -n "${1:-}" ]; then
    index="$1"
else
    index="$work/index"
    "$bin" build index_fixtures --out "$index" --quiet
fi

"$bin" serve "$index" --listen 127.0.0.1:0 --quiet >"$work/out" 2>"$work/err" &
server_pid=$!
for _ in $(seq 1 100); do
    grep -q "ready on" "$work/out" 2>/dev/null && break
    sleep 0.1
done
url="$(grep -o 'ready on http://[0-9.:]*' "$work/out" | sed 's/ready on //')"
[ -n "$url" ] || { echo "the server did not start:" >&2; cat "$work/err" >&2; exit 1; }

# Goals in the demo library's vocabulary (the Lean stock ledger), sent in turn.
cat >"$work/post.lua" <<'EOF'
local goals = {
  '{"goal": "reconcile n n = Finding.balanced"}',
  '{"goal": "b : Book\\nm : Movement\\n⊢ (b.record m).onHand = replay b.onHand [m]"}',
  '{"goal": "ms : List Movement\\n⊢ receivedFast ms = received ms", "explain": true}',
  '{"goal": "c : Nat\\n⊢ replay q (audit c :: ms) = replay c ms", "limit": 50}',
}
local bodies = os.getenv("QUARRY_LOAD_BODIES")
if bodies and bodies ~= "" then
  goals = {}
  for line in io.lines(bodies) do
    if line ~= "" then goals[#goals + 1] = line end
  end
end
local i = 0
request = function()
  i = i + 1
  return wrk.format("POST", "/v1/rank", { ["Content-Type"] = "application/json" }, goals[(i % #goals) + 1])
end
EOF

rss() { awk -v k="$1:" '$1 == k { print $2 " " $3 }' "/proc/$server_pid/status"; }
echo "== server $url, $(grep -o "index [^,]*" "$work/out")"
echo "== memory after loading: VmRSS $(rss VmRSS)"
# Warm up (page cache, allocator), then measure.
export QUARRY_LOAD_BODIES="$bodies"
[ -z "$bodies" ] || echo "== bodies: $(wc -l <"$bodies") lines of $bodies"
wrk -t"$threads" -c"$connections" -d2s -s "$work/post.lua" "$url/v1/rank" >/dev/null
echo "== wrk -t$threads -c$connections -d$duration --latency POST /v1/rank"
wrk -t"$threads" -c"$connections" -d"$duration" --latency -s "$work/post.lua" "$url/v1/rank"
echo "== memory after the run: VmRSS $(rss VmRSS), peak VmHWM $(rss VmHWM)"
