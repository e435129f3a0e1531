"""The Python peers of the side-by-side harness, and the table of ratios.

Takes the folder `export.rs` wrote (quarry's tokens, vectors, goals and its own figures of
this run) and measures on exactly that data: BM25 with bm25s and rank_bm25, dense search
with faiss (HNSW and exact) and hnswlib, and the pipeline a user would assemble (bm25s +
faiss HNSW + reciprocal rank fusion in numpy). Prints one table of ratios quarry / peer and
writes everything to a JSON file. It hard-codes no figure: every number comes from this run
(quarry's from quarry.json, written minutes before by the same run.sh).

    python compare.py EXPORT_DIR OUT_JSON [REPEATS]
"""

import json
import os
import platform
import statistics
import sys
import time
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import threadpoolctl

import bm25s
import faiss
import hnswlib
from rank_bm25 import BM25Okapi

K1, B = 1.2, 0.75  # tantivy's BM25 constants (its query/bm25.rs; from memory), matched
EF_SEARCH = [16, 32, 64, 128]
M, EF_CONSTRUCTION = 16, 100  # quarry's HNSW defaults, matched
FUSION_DEPTH = 100  # quarry's FUSION_DEPTH (src/retrieve/mod.rs)


def timed(repeats, work):
    """Wall time in seconds of each of `repeats` runs of `work()`."""
    runs = []
    for _ in range(repeats):
        start = time.perf_counter()
        work()
        runs.append(time.perf_counter() - start)
    return runs


def overlap_at_10(a_lists, b_lists):
    """Mean share of the first top-10 list found in the second (top-10 agreement)."""
    shares = [len(set(a[:10]) & set(b[:10])) / 10 for a, b in zip(a_lists, b_lists)]
    return float(np.mean(shares))


def recall_at_10(found, exact):
    """Mean recall@10 of `found` against the exact top 10."""
    return overlap_at_10(exact, found)


def machine():
    cpu = ""
    try:
        with open("/proc/cpuinfo") as f:
            for line in f:
                if line.startswith("model name"):
                    cpu = line.split(":", 1)[1].strip()
                    break
    except OSError:
        pass
    with open("/proc/loadavg") as f:
        load = f.read().split()[:3]
    return {
        "cpu": cpu,
        "cores": os.cpu_count(),
        "load_average_at_peers": [float(x) for x in load],
        "python": platform.python_version(),
        "openblas_coretype": os.environ.get("OPENBLAS_CORETYPE"),
        "threadpools": threadpoolctl.threadpool_info(),
        "versions": {
            "bm25s": bm25s.__version__,
            "faiss": faiss.__version__,
            "numpy": np.__version__,
            "hnswlib": getattr(hnswlib, "__version__", "0.8 (no __version__)"),
        },
    }


def bm25_peers(corpus, queries, repeats):
    out = {}
    # bm25s, Lucene's BM25 variant (idf ln(1 + (N - n + 0.5) / (n + 0.5)), as tantivy).
    builds = []
    model = None
    for _ in range(repeats):
        start = time.perf_counter()
        model = bm25s.BM25(k1=K1, b=B, method="lucene")
        model.index(corpus, show_progress=False)
        builds.append(time.perf_counter() - start)
    vocab = model.vocab_dict
    known = [[t for t in q if t in vocab] or [""] for q in queries]
    top = {}
    for threads in (1, 2):
        def batch():
            ids, _ = model.retrieve(known, k=10, n_threads=threads, show_progress=False)
            return ids
        top[threads] = batch()
        runs = timed(repeats, batch)
        out[f"bm25s_qps_{threads}_thread{'s' if threads > 1 else ''}"] = len(queries) / statistics.median(runs)
    out["bm25s_index_seconds"] = statistics.median(builds)
    out["bm25s_top10"] = [list(map(int, r)) for r in top[1]]

    # rank_bm25 (Okapi; its idf is ln((N - n + 0.5) / (n + 0.5)) floored at ε·mean idf).
    builds = []
    okapi = None
    for _ in range(repeats):
        start = time.perf_counter()
        okapi = BM25Okapi(corpus, k1=K1, b=B)
        builds.append(time.perf_counter() - start)

    def okapi_top(q):
        scores = okapi.get_scores(q)
        best = np.argpartition(-scores, 10)[:10]
        return best[np.argsort(-scores[best], kind="stable")].tolist()

    out["rank_bm25_index_seconds"] = statistics.median(builds)
    out["rank_bm25_top10"] = [okapi_top(q) for q in queries]
    # rank_bm25 scores every document per query in Python and numpy: one repeat of the
    # 500 goals takes about a minute, so it runs once.
    few = 1
    runs = timed(few, lambda: [okapi_top(q) for q in queries])
    out["rank_bm25_qps_1_thread"] = len(queries) / statistics.median(runs)
    with ThreadPoolExecutor(2) as pool:
        runs = timed(few, lambda: list(pool.map(okapi_top, queries)))
    out["rank_bm25_qps_2_threads"] = len(queries) / statistics.median(runs)
    return out


def dense_peers(premises, goals, repeats):
    out = {}
    n, dim = premises.shape
    faiss.omp_set_num_threads(1)
    exact = faiss.IndexFlatIP(dim)
    exact.add(premises)
    _, exact_top = exact.search(goals, 10)
    exact_top = exact_top.tolist()
    out["faiss_exact_qps_1_thread_loop"] = len(goals) / statistics.median(
        timed(repeats, lambda: [exact.search(goals[i : i + 1], 10) for i in range(len(goals))])
    )

    faiss_builds = {}
    hnsw = None
    for threads in (1, 2):
        faiss.omp_set_num_threads(threads)
        runs = []
        for _ in range(min(repeats, 3)):
            start = time.perf_counter()
            index = faiss.IndexHNSWFlat(dim, M, faiss.METRIC_INNER_PRODUCT)
            index.hnsw.efConstruction = EF_CONSTRUCTION
            index.add(premises)
            runs.append(time.perf_counter() - start)
            if threads == 1:
                hnsw = index
        faiss_builds[threads] = statistics.median(runs)
    out["faiss_hnsw_build_seconds_1_thread"] = faiss_builds[1]
    out["faiss_hnsw_build_seconds_2_threads"] = faiss_builds[2]
    faiss.omp_set_num_threads(1)

    lib_builds = {}
    lib = None
    for threads in (1, 2):
        runs = []
        for _ in range(min(repeats, 3)):
            start = time.perf_counter()
            index = hnswlib.Index(space="ip", dim=dim)
            index.init_index(max_elements=n, ef_construction=EF_CONSTRUCTION, M=M, random_seed=1)
            index.add_items(premises, np.arange(n), num_threads=threads)
            runs.append(time.perf_counter() - start)
            if threads == 1:
                lib = index
        lib_builds[threads] = statistics.median(runs)
    out["hnswlib_build_seconds_1_thread"] = lib_builds[1]
    out["hnswlib_build_seconds_2_threads"] = lib_builds[2]

    by_ef = []
    for ef in EF_SEARCH:
        hnsw.hnsw.efSearch = ef
        lib.set_ef(max(ef, 10))
        f_top = hnsw.search(goals, 10)[1].tolist()
        l_top = lib.knn_query(goals, k=10, num_threads=1)[0].tolist()
        f_loop = timed(repeats, lambda: [hnsw.search(goals[i : i + 1], 10) for i in range(len(goals))])
        f_batch = timed(repeats, lambda: hnsw.search(goals, 10))
        l_loop = timed(repeats, lambda: [lib.knn_query(goals[i : i + 1], k=10, num_threads=1) for i in range(len(goals))])
        by_ef.append(
            {
                "ef_search": ef,
                "faiss_hnsw_qps_1_thread_loop": len(goals) / statistics.median(f_loop),
                "faiss_hnsw_qps_1_thread_batch": len(goals) / statistics.median(f_batch),
                "faiss_hnsw_recall10": recall_at_10(f_top, exact_top),
                "hnswlib_qps_1_thread_loop": len(goals) / statistics.median(l_loop),
                "hnswlib_recall10": recall_at_10(l_top, exact_top),
            }
        )
    out["by_ef_search"] = by_ef
    return out, exact_top, hnsw


def pipeline_peer(corpus, queries, goals, fusion, repeats):
    """bm25s + faiss HNSW + weighted reciprocal rank fusion in numpy, one goal at a time."""
    model = bm25s.BM25(k1=K1, b=B, method="lucene")
    model.index(corpus, show_progress=False)
    vocab = model.vocab_dict
    known = [[t for t in q if t in vocab] or [""] for q in queries]
    dim = goals.shape[1]
    faiss.omp_set_num_threads(1)
    premises = PREMISES
    index = faiss.IndexHNSWFlat(dim, M, faiss.METRIC_INNER_PRODUCT)
    index.hnsw.efConstruction = EF_CONSTRUCTION
    index.add(premises)
    index.hnsw.efSearch = FUSION_DEPTH
    k = fusion["k"]
    weights = dict(fusion["weights"])
    w_lex, w_dense = weights.get("lexical", 1.0), weights.get("dense", 1.0)
    ranks = 1.0 / (k + np.arange(1, FUSION_DEPTH + 1, dtype=np.float64))

    def one(i):
        lex, _ = model.retrieve([known[i]], k=FUSION_DEPTH, n_threads=1, show_progress=False)
        _, dense = index.search(goals[i : i + 1], FUSION_DEPTH)
        lex, dense = lex[0], dense[0][dense[0] >= 0]
        ids = np.concatenate([lex, dense])
        contrib = np.concatenate([w_lex * ranks[: len(lex)], w_dense * ranks[: len(dense)]])
        uniq, inverse = np.unique(ids, return_inverse=True)
        scores = np.zeros(len(uniq))
        np.add.at(scores, inverse, contrib)
        return uniq[np.argsort(-scores, kind="stable")[:10]].tolist()

    top = [one(i) for i in range(len(goals))]
    runs = timed(repeats, lambda: [one(i) for i in range(len(goals))])
    per_goal = []
    for i in range(len(goals)):
        start = time.perf_counter()
        one(i)
        per_goal.append((time.perf_counter() - start) * 1000)
    return {
        "ms_per_goal": 1000 * statistics.median(runs) / len(goals),
        "median_ms": float(np.median(per_goal)),
        "p99_ms": float(np.quantile(per_goal, 0.99)),
        "top10": top,
    }


PREMISES = None


def smallest_ef_at(by_ef, qps_key, recall_key, floor=0.95):
    for row in by_ef:
        if row[recall_key] >= floor:
            return row["ef_search"], row[qps_key], row[recall_key]
    return None


def main():
    global PREMISES
    export, out_path = sys.argv[1], sys.argv[2]
    repeats = int(sys.argv[3]) if len(sys.argv) > 3 else 5
    with open(os.path.join(export, "quarry.json")) as f:
        quarry = json.load(f)
    with open(os.path.join(export, "corpus_tokens.json")) as f:
        corpus = json.load(f)
    with open(os.path.join(export, "goal_tokens.json")) as f:
        queries = json.load(f)
    dim = quarry["dim"]
    PREMISES = np.fromfile(os.path.join(export, "premise_vectors.f32"), dtype="<f4").reshape(-1, dim)
    goals = np.fromfile(os.path.join(export, "goal_vectors.f32"), dtype="<f4").reshape(-1, dim)
    assert len(corpus) == PREMISES.shape[0] == quarry["declarations"], "export out of step"
    assert len(queries) == goals.shape[0] == quarry["goals"], "export out of step"

    print(f"peers: BM25 on {len(corpus)} declarations, {len(queries)} goals", file=sys.stderr)
    bm25 = bm25_peers(corpus, queries, repeats)
    print("peers: dense search", file=sys.stderr)
    dense, exact_top, _ = dense_peers(PREMISES, goals, repeats)
    print("peers: the Python pipeline", file=sys.stderr)
    pipeline = pipeline_peer(corpus, queries, goals, quarry["fusion"], repeats)

    q_bm25, q_hnsw, q_fused = quarry["bm25"], quarry["hnsw"], quarry["fused"]
    q_by_ef = {row["ef_search"]: row for row in q_hnsw["by_ef_search"]}
    for row in q_hnsw["by_ef_search"]:
        row["recall10"] = recall_at_10(row["top10"], exact_top)
    rows = []

    def ratio(measure, q, p, better):
        rows.append({"measure": measure, "quarry": q, "peer": p, "ratio": q / p, "better": better})

    ratio("BM25 indexing s, vs bm25s", q_bm25["index_seconds"], bm25["bm25s_index_seconds"], "lower")
    ratio("BM25 indexing s, vs rank_bm25", q_bm25["index_seconds"], bm25["rank_bm25_index_seconds"], "lower")
    ratio("BM25 queries/s 1 thread, vs bm25s", q_bm25["qps_1_thread"], bm25["bm25s_qps_1_thread"], "higher")
    ratio("BM25 queries/s 2 threads, vs bm25s", q_bm25["qps_2_threads"], bm25["bm25s_qps_2_threads"], "higher")
    ratio("BM25 queries/s 1 thread, vs rank_bm25", q_bm25["qps_1_thread"], bm25["rank_bm25_qps_1_thread"], "higher")
    ratio("BM25 queries/s 2 threads, vs rank_bm25", q_bm25["qps_2_threads"], bm25["rank_bm25_qps_2_threads"], "higher")
    agreement = {
        "quarry_vs_bm25s": overlap_at_10(q_bm25["top10"], bm25["bm25s_top10"]),
        "quarry_vs_rank_bm25": overlap_at_10(q_bm25["top10"], bm25["rank_bm25_top10"]),
        "bm25s_vs_rank_bm25": overlap_at_10(bm25["bm25s_top10"], bm25["rank_bm25_top10"]),
    }
    ratio("HNSW build s 1 thread, vs faiss", q_hnsw["build_seconds_sequential"], dense["faiss_hnsw_build_seconds_1_thread"], "lower")
    ratio("HNSW build s 2 threads, vs faiss", q_hnsw["build_seconds_parallel"], dense["faiss_hnsw_build_seconds_2_threads"], "lower")
    ratio("HNSW build s 1 thread, vs hnswlib", q_hnsw["build_seconds_sequential"], dense["hnswlib_build_seconds_1_thread"], "lower")
    ratio("HNSW build s 2 threads, vs hnswlib", q_hnsw["build_seconds_parallel"], dense["hnswlib_build_seconds_2_threads"], "lower")
    for row in dense["by_ef_search"]:
        ef = row["ef_search"]
        q = q_by_ef[ef]
        ratio(f"HNSW queries/s ef {ef}, vs faiss HNSW (loop)", q["qps_1_thread"], row["faiss_hnsw_qps_1_thread_loop"], "higher")
        ratio(f"HNSW queries/s ef {ef}, vs faiss HNSW (batch)", q["qps_1_thread"], row["faiss_hnsw_qps_1_thread_batch"], "higher")
        ratio(f"HNSW queries/s ef {ef}, vs hnswlib", q["qps_1_thread"], row["hnswlib_qps_1_thread_loop"], "higher")
    ratio("exact scan queries/s, vs faiss IndexFlatIP", q_hnsw["exact_qps_1_thread"], dense["faiss_exact_qps_1_thread_loop"], "higher")
    q_equal = smallest_ef_at(q_hnsw["by_ef_search"], "qps_1_thread", "recall10")
    f_equal = smallest_ef_at(dense["by_ef_search"], "faiss_hnsw_qps_1_thread_loop", "faiss_hnsw_recall10")
    if q_equal and f_equal:
        ratio(
            f"HNSW queries/s at recall@10 >= 0.95 (quarry ef {q_equal[0]}, faiss ef {f_equal[0]})",
            q_equal[1],
            f_equal[1],
            "higher",
        )
    ratio("fused ranking ms per goal, vs bm25s+faiss+RRF", q_fused["ms_per_goal"], pipeline["ms_per_goal"], "lower")
    ratio("fused ranking median ms, vs bm25s+faiss+RRF", q_fused["median_ms"], pipeline["median_ms"], "lower")

    transformer = None
    slot = os.path.join(os.path.dirname(out_path), "transformer.json")
    if os.path.exists(slot):
        # Written by benches/peers/transformer.py just before (run.sh): rows of
        # {"measure", "quarry", "peer", "better"} against sentence-transformers.
        with open(slot) as f:
            transformer = json.load(f)
        for r in transformer.get("rows", []):
            ratio(r["measure"], r["quarry"], r["peer"], r["better"])

    print("| measure | quarry | peer | quarry / peer | better if |")
    print("|---|---:|---:|---:|---|")
    for r in rows:
        print(f"| {r['measure']} | {r['quarry']:.4g} | {r['peer']:.4g} | {r['ratio']:.2f} | {r['better']} |")
    print("\ntop-10 agreement: " + ", ".join(f"{k} {v:.3f}" for k, v in agreement.items()))
    print("recall@10 against faiss exact:")
    for row in dense["by_ef_search"]:
        ef = row["ef_search"]
        print(
            f"  ef {ef}: quarry {q_by_ef[ef]['recall10']:.3f}, faiss HNSW {row['faiss_hnsw_recall10']:.3f}, "
            f"hnswlib {row['hnswlib_recall10']:.3f}"
        )
    fused_agree = overlap_at_10(q_fused["top10"], pipeline["top10"])
    print(f"fused top-10 agreement, quarry vs the Python pipeline: {fused_agree:.3f}")
    if transformer is None:
        print("transformer embeddings vs sentence-transformers: not measured (no transformer.json)")

    for d in (bm25, q_bm25, pipeline, q_fused):
        for key in [k for k in d if k.endswith("top10")]:
            del d[key]
    for row in q_hnsw["by_ef_search"]:
        row.pop("top10", None)
    result = {
        "date_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
        "machine": machine(),
        "declarations": quarry["declarations"],
        "goals": quarry["goals"],
        "dim": dim,
        "repeats": repeats,
        "rows": rows,
        "top10_agreement": agreement,
        "fused_top10_agreement": fused_agree,
        "quarry": {"bm25": q_bm25, "hnsw": q_hnsw, "fused": q_fused, "index_build_seconds": quarry["index_build_seconds"]},
        "peers": {"bm25": bm25, "dense": dense, "pipeline": pipeline},
        "transformer_embeddings": transformer
        or {"status": "not measured: benches/peers/transformer.py writes transformer.json beside this file"},
    }
    with open(out_path, "w") as f:
        json.dump(result, f, indent=1)
    print(f"peers: wrote {out_path}", file=sys.stderr)


if __name__ == "__main__":
    main()
