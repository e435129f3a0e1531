#!/usr/bin/env bash
# The cost curve of quarry: generate seeded synthetic Coq libraries, build and serve each
# with the release binary, then plot cost against size on log-log axes.
#   benches/cost/run.sh [SIZE...]      (default: 10k 100k 300k 1M)
# Writes target/cost/result-SIZE.json, target/cost/cost.json and target/cost/cost-*.svg;
# prints the table and the fitted slopes. A million declarations takes over an hour on
# two cores: run it under nohup (logs: target/cost/run.log).
set -euo pipefail
cd "$(dirname "$0")/../.."
sizes=("$@")
if [ ${#sizes[@]} -eq 0 ]; then sizes=(10k 100k 300k 1M); fi
cargo build --release --quiet
cargo bench --bench cost --no-run --quiet
mkdir -p target/cost
# Measure a copy: another build of the release binary during a long run must not change
# what is measured. (The results always go to target/cost; the build follows
# CARGO_TARGET_DIR when it is set.)
cp "${CARGO_TARGET_DIR:-target}/release/quarry" target/cost/quarry-measured
export QUARRY_BIN="$PWD/target/cost/quarry-measured"
for size in "${sizes[@]}"; do
  cargo bench --bench cost --quiet -- measure "$size"
done
cargo bench --bench cost --quiet -- plot
