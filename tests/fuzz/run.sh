#!/usr/bin/env bash
# Runs quarry's fuzz targets one after another, each for SECONDS, on one core each
# (libFuzzer through cargo-fuzz; the stable toolchain builds it when RUSTC_BOOTSTRAP=1).
#
#   tests/fuzz/run.sh SECONDS [TARGET...]     (default: every target)
#
# Seeds each target's corpus (tests/fuzz/corpus/TARGET, not committed) from the bundled demo
# library, the Coq standard library when installed (/usr/lib/ocaml/coq/theories) and the
# hand-written seeds in tests/fuzz/seeds/. Prints, per target, the executions libFuzzer
# reports; a crash stops the script with libFuzzer's exit code and leaves the input in
# tests/fuzz/artifacts/TARGET/ (copy it to tests/fuzz/regressions/TARGET/ and fix the code);
# FUZZ_KEEP_GOING=1 runs the remaining targets first and exits with the crash's code at the end.
# The targets are built once, then run directly, so nothing is rebuilt between targets.
# FUZZ_SANITIZER (default `address`) and FUZZ_BUILD (empty: cargo-fuzz's optimised build
# with debug assertions and overflow checks; `--dev` for a quick unoptimised one) tune the
# build; the CI smoke uses the quick ones.
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
root="$(cd "$here/../.." && pwd)"
cd "$root"
seconds="${1:?usage: tests/fuzz/run.sh SECONDS [TARGET...]}"
shift
targets=("$@")
if [ ${#targets[@]} -eq 0 ]; then
  targets=(lean_frontend coq_frontend goal_parser tokenizer rank_request)
fi
sanitizer="${FUZZ_SANITIZER:-address}"
build="${FUZZ_BUILD:-}"
export RUSTC_BOOTSTRAP=1

coq_theories=/usr/lib/ocaml/coq/theories

# Copies files matching NAME-PATTERN under DIR into the corpus folder CORPUS.
seed_from() {
  local corpus="$1" dir="$2" pattern="$3"
  [ -d "$dir" ] || return 0
  find "$dir" -type f -name "$pattern" -size -64k -print0 |
    while IFS= read -r -d '' f; do
      cp "$f" "$corpus/seed-$(printf %s "$f" | cksum | cut -d' ' -f1)"
    done
}

seed() {
  local target="$1" corpus="$here/corpus/$1"
  mkdir -p "$corpus"
  [ -n "$(ls -A "$corpus")" ] && return 0
  case "$target" in
    lean_frontend) seed_from "$corpus" index_fixtures/lean '*.lean' ;;
    coq_frontend)
      seed_from "$corpus" index_fixtures '*.v'
      seed_from "$corpus" "$coq_theories" '*.v'
      ;;
    goal_parser) seed_from "$corpus" "$here/seeds/goal_parser" '*' ;;
    tokenizer)
      seed_from "$corpus" "$here/seeds/goal_parser" '*'
      seed_from "$corpus" index_fixtures '*.lean'
      seed_from "$corpus" index_fixtures '*.v'
      ;;
    rank_request) seed_from "$corpus" "$here/seeds/rank_request" '*' ;;
    *) echo "unknown fuzz target \`$target\`" >&2; exit 2 ;;
  esac
}

case "$build" in
  --dev) profile=debug ;;
  *) profile=release ;;
esac
triple="$(rustc -vV | sed -n 's/^host: //p')"
echo "== build the fuzz targets (${build:-optimised}, sanitizer $sanitizer)"
cargo fuzz build --fuzz-dir tests/fuzz --sanitizer "$sanitizer" ${build:+"$build"}
bin_dir="${CARGO_TARGET_DIR:-$here/target}/$triple/$profile"

mkdir -p "$here/logs"
failed=0
for target in "${targets[@]}"; do
  seed "$target"
  mkdir -p "$here/artifacts/$target"
  log="$here/logs/$target.log"
  echo "== fuzz $target for ${seconds}s (log: tests/fuzz/logs/$target.log)"
  status=0
  "$bin_dir/$target" "$here/corpus/$target" \
    -max_total_time="$seconds" -max_len=65536 -timeout=20 -rss_limit_mb=2048 \
    -print_final_stats=1 -artifact_prefix="$here/artifacts/$target/" \
    >"$log" 2>&1 || status=$?
  runs="$(grep -o 'stat::number_of_executed_units: [0-9]*' "$log" | tail -1 | grep -o '[0-9]*$' || true)"
  secs="$(grep -o 'Done [0-9]* runs in [0-9]* second' "$log" | tail -1 | grep -o 'in [0-9]*' | grep -o '[0-9]*' || true)"
  cov="$(grep -o 'cov: [0-9]*' "$log" | tail -1 | grep -o '[0-9]*' || true)"
  echo "   $target: ${runs:-?} executions in ${secs:-?} s, coverage ${cov:-?} edges, exit $status"
  if [ "$status" -ne 0 ]; then
    tail -40 "$log" >&2
    failed="$status"
    [ "${FUZZ_KEEP_GOING:-0}" = 1 ] || exit "$status"
  fi
done
exit "$failed"
