#!/usr/bin/env bash
# quarry side by side with what a user would assemble instead, on the same machine in one
# run: BM25 (bm25s, rank_bm25), dense search (faiss HNSW and exact, hnswlib) and the fused
# ranking (bm25s + faiss + reciprocal rank fusion in numpy), on the Coq standard library's
# declarations and 500 held-out goals, tokens and vectors exported by quarry.
#   benches/peers/run.sh [REPEATS]     (default 5; medians over the repeats)
# Needs Debian's libcoq-stdlib and python3 with venv; installs the peers from PyPI into
# target/peers/venv. Writes target/peers/peers.json and prints the table of ratios.
set -euo pipefail
cd "$(dirname "$0")/../.."
repeats="${1:-5}"
out=target/peers
mkdir -p "$out"
if [ ! -x "$out/venv/bin/python" ]; then
  python3 -m venv "$out/venv"
fi
"$out/venv/bin/pip" install --quiet bm25s rank_bm25 faiss-cpu hnswlib numpy threadpoolctl
cargo build --release --quiet
cargo bench --bench peers_export --quiet -- "$PWD/$out/export" "$repeats"
# Benchmark figures only: let OpenBLAS pick its kernel for this machine (tests keep the
# pinned OPENBLAS_CORETYPE); the kernel that ran is recorded by threadpoolctl in the JSON.
env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE \
  "$out/venv/bin/python" benches/peers/compare.py "$out/export" "$out/peers.json" "$repeats"
