#!/usr/bin/env bash
# Where one ranking's time goes: perf samples (DWARF call graphs) of `quarry serve` while
# one client sends goals, one at a time, then the inclusive share of each ranking stage.
#   benches/cost/profile.sh INDEX_DIR GOALS_FILE [SECONDS]
# GOALS_FILE holds one goal per line (target/cost/lib-SIZE/goals.txt). Needs perf and curl.
set -euo pipefail
index="$1"; goals="$2"; seconds="${3:-20}"
quarry="${QUARRY_BIN:-$(dirname "$0")/../../target/release/quarry}"
work="$(mktemp -d)"
"$quarry" serve "$index" --listen 127.0.0.1:0 --no-watch --quiet > "$work/serve.log" &
server=$!
trap 'kill "$server" 2>/dev/null || true; rm -rf "$work"' EXIT
until grep -q "ready on" "$work/serve.log"; do sleep 0.5; done
url="$(grep -o 'ready on http://[^ ]*' "$work/serve.log" | sed 's/ready on //')/v1/rank"
client() {
  while true; do
    while IFS= read -r goal; do
      python3 -c 'import json,sys; print(json.dumps({"goal": sys.argv[1], "limit": 10}))' "$goal" |
        curl -s -o /dev/null -H 'content-type: application/json' --data-binary @- "$url"
    done < "$goals"
  done
}
client & driver=$!
sleep 3
perf record -F 499 --call-graph dwarf,32768 -p "$server" -o "$work/perf.data" -- sleep "$seconds" 2> /dev/null
kill "$driver" 2>/dev/null || true
perf report -i "$work/perf.data" --children --stdio --percent-limit 0.5 2>/dev/null |
  grep -E '^ +[0-9.]+%' |
  grep -E 'quarry::retrieve::rank$|parse_goal|query_terms|encode_goal|LexicalIndex::search|search_allowed|nearest_theorems|neighbour_votes|reciprocal_rank_fusion|PremiseFilter|HnswIndex::search|serde_json|routes::rank' |
  awk '{printf "%8s %s\n", $1, $NF}' | sort -u -k2,2 | sort -rn
