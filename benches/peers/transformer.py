"""The transformer row of the side-by-side table: quarry's transformer encoder against
sentence-transformers, same model files, same 160 sentences, same batch size (32).

Usage (benches/peers/run.sh calls it):

    python benches/peers/transformer.py MODEL_DIR CRITERION_DIR OUT.json

quarry's figure is the median iteration time of the criterion bench
`transformer/all-MiniLM-L6-v2, 160 sentences, batch 32` (`cargo bench --bench transformer`,
run just before with QUARRY_TRANSFORMER_MODEL=MODEL_DIR), read from criterion's own
`estimates.json` under CRITERION_DIR; sentence-transformers' is the median of the timed
passes of index_fixtures/transformer-reference/measure_speed.py in this process. Writes
{"rows": [...], ...} for compare.py, which adds the rows to its table.
"""

import glob
import json
import os
import statistics
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "index_fixtures" / "transformer-reference"))

import measure_speed  # noqa: E402  (the path above)
import sentence_transformers  # noqa: E402
import torch  # noqa: E402


def quarry_rate(criterion_dir):
    """Sentences per second of quarry's batch bench: elements per iteration over the median
    iteration time, as criterion recorded them."""
    for meta in glob.glob(os.path.join(criterion_dir, "transformer", "*", "new", "benchmark.json")):
        with open(meta) as f:
            bench = json.load(f)
        if not bench["function_id"].startswith("all-MiniLM-L6-v2"):
            continue
        with open(os.path.join(os.path.dirname(meta), "estimates.json")) as f:
            median_ns = json.load(f)["median"]["point_estimate"]
        elements = bench["throughput"]["Elements"]
        return elements / (median_ns / 1e9), bench["full_id"]
    raise SystemExit(f"transformer.py: no criterion figure of the transformer bench under {criterion_dir}")


def main():
    model_dir, criterion_dir, out_path = sys.argv[1], sys.argv[2], sys.argv[3]
    quarry, bench_id = quarry_rate(criterion_dir)
    rates, count = measure_speed.rates(model_dir)
    peer = statistics.median(rates)
    result = {
        "rows": [
            {
                "measure": f"transformer sentences/s, batch {measure_speed.BATCH}, vs sentence-transformers",
                "quarry": quarry,
                "peer": peer,
                "better": "higher",
            }
        ],
        "quarry_bench": bench_id,
        "sentences": count,
        "peer_passes": rates,
        "versions": {
            "sentence_transformers": sentence_transformers.__version__,
            "torch": torch.__version__,
            "torch_threads": torch.get_num_threads(),
        },
    }
    with open(out_path, "w") as f:
        json.dump(result, f, indent=1)
    print(f"transformer: quarry {quarry:.1f}, sentence-transformers {peer:.1f} sentences/s", file=sys.stderr)


if __name__ == "__main__":
    main()
