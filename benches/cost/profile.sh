#!/usr/bin/env bash
# Where one ranking's time goes: perf samples (DWARF call graphs) of `quarry serve` while
# one client sends goals over one keep-alive connection, then the inclusive share of each
# ranking stage in the server's CPU time.
#   benches/cost/profile.sh INDEX_DIR GOALS_FILE [SECONDS]
# GOALS_FILE holds one goal per line (target/cost/lib-SIZE/goals.txt). Needs perf, python3.
set -uo pipefail
index="$1"; goals="$2"; seconds="${3:-12}"
quarry="${QUARRY_BIN:-$(dirname "$0")/../../target/release/quarry}"
port=$((40000 + RANDOM % 20000))
work="$(mktemp -d)"
"$quarry" serve "$index" --listen "127.0.0.1:$port" --no-watch --quiet > "$work/serve.log" 2>&1 &
server=$!
trap 'kill "$server" 2>/dev/null; rm -rf "$work"' EXIT
until grep -q "ready on" "$work/serve.log"; do sleep 0.5; done
python3 - "$port" "$goals" "$((seconds + 4))" <<'PY' &
import http.client, json, sys, time
port, path, budget = int(sys.argv[1]), sys.argv[2], float(sys.argv[3])
goals = [l.strip() for l in open(path) if l.strip()]
conn = http.client.HTTPConnection("127.0.0.1", port)
end = time.time() + budget
while time.time() < end:
    for g in goals:
        conn.request("POST", "/v1/rank", json.dumps({"goal": g, "limit": 10}),
                     {"content-type": "application/json"})
        conn.getresponse().read()
PY
client=$!
sleep 2
perf record -F 499 --call-graph dwarf,16384 -p "$server" -o "$work/perf.data" -- sleep "$seconds" > /dev/null 2>&1
wait "$client"
perf report -i "$work/perf.data" --stdio 2>/dev/null | grep -m1 '^# Samples'
perf report -i "$work/perf.data" --children --stdio --percent-limit 0.5 2>/dev/null |
  grep -E '^ +[0-9.]+%' |
  grep -E 'quarry::retrieve::rank$|parse_goal|query_terms|encode_goal|LexicalIndex::search|search_allowed|nearest_theorems|neighbour_votes|reciprocal_rank_fusion|HnswIndex::search|routes::rank::rank_body' |
  awk '{printf "%8s %s\n", $1, $NF}' | sort -u -k2,2 | sort -rn
