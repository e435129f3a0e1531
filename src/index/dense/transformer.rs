//! The dense part of an index built with a pretrained transformer model.
//!
//! Takes the library, the shared tokenizer, a [`TransformerChoice`] (model folder, batch
//! size) and the index folder being rebuilt; gives a [`DensePart`] whose row `i` is the
//! model's vector of declaration `i`'s premise-side text, with a [`TransformerSummary`] for
//! the manifest. The generation gets its own copy of the model ([`MODEL_PART`], hard links
//! where possible), so queries encode goals without the original folder, and the text key
//! of every row, so the next build into the same folder re-embeds only declarations whose
//! text changed. It learns nothing from proofs: no proof, held out or not, reaches it.

use std::path::Path;
use std::sync::Arc;
use std::time::Instant;

use serde::Serialize;

use super::{premise_tokens, DenseBuildError, DenseEncoder, DensePart, TransformerChoice};
use crate::dense::transformer::{
    cache, text_key, text_of_tokens, CacheSource, EmbeddingCache, ModelFolder, ModelIdentity,
    TextKey, TransformerEncoder, TransformerError,
};
use crate::dense::{DenseError, VectorIndex, VectorSet};
use crate::library::store::{self, Generation, GenerationWriter, StoreError};
use crate::library::Library;
use crate::tokens::Tokenizer;

/// The folder part holding the generation's copy of the model.
pub const MODEL_PART: &str = "dense/model";

/// What a transformer build did, recorded under `dense` in the manifest.
#[derive(Clone, Debug, PartialEq, Serialize, serde::Deserialize)]
pub struct TransformerSummary {
    /// Always `transformer (candle BERT)`.
    pub encoder: String,
    pub model: ModelIdentity,
    pub dim: usize,
    pub batch_size: usize,
    /// Declarations embedded (one vector each).
    pub statements: usize,
    /// Distinct texts whose vectors came from the previous generation.
    pub reused: usize,
    /// Distinct texts run through the model in this build.
    pub computed: usize,
    /// Where the re-used vectors came from, or why there were none.
    pub cache: String,
    /// Model files hard-linked into the generation, and copied.
    pub model_files_linked: usize,
    pub model_files_copied: usize,
    /// `exact` or `hnsw`.
    pub vector_index: String,
    pub load_seconds: f64,
    pub encode_seconds: f64,
}

/// The text the model reads for declaration `id`: its premise-side tokens, joined.
pub fn premise_text(
    library: &Library,
    tokenizer: &Tokenizer,
    id: crate::library::DeclId,
) -> String {
    let tokens = premise_tokens(library, tokenizer, id);
    let refs: Vec<&str> = tokens.iter().map(String::as_str).collect();
    text_of_tokens(&refs)
}

/// The re-usable vectors of the live generation of `index_dir`, if it has any for `model`.
/// A missing or damaged previous generation is not an error: the build embeds everything
/// and says why.
fn previous_cache(index_dir: &Path, model: &ModelIdentity) -> (EmbeddingCache, String) {
    let generation = match store::open_generation(index_dir) {
        Ok(g) => g,
        Err(StoreError::NotAnIndex(_)) => {
            return (EmbeddingCache::default(), "none: a new index folder".into())
        }
        Err(e) => {
            return (
                EmbeddingCache::default(),
                format!("none: the previous generation cannot be opened ({e})"),
            )
        }
    };
    match EmbeddingCache::from_generation(&generation, &model.fingerprint, model.dim) {
        Ok((cache, CacheSource::Previous(n))) => (
            cache,
            format!(
                "{n} texts from the previous generation `{}`",
                generation.manifest.build_id
            ),
        ),
        Ok((cache, CacheSource::Empty(why))) => (cache, format!("none: {why}")),
        Err(e) => (
            EmbeddingCache::default(),
            format!("none: the previous generation's cache is unreadable ({e})"),
        ),
    }
}

/// Embeds every declaration of `library` with the model `choice` names, re-using the
/// previous generation's vectors of unchanged texts, and writes the model copy, the cache
/// keys, the vectors and the (empty) training goals into `writer`.
pub fn build_transformer_dense(
    library: &Library,
    tokenizer: &Arc<Tokenizer>,
    choice: &TransformerChoice,
    index_dir: &Path,
    writer: &mut GenerationWriter,
) -> Result<(DensePart, TransformerSummary), DenseBuildError> {
    let started = Instant::now();
    let folder = ModelFolder::read(&choice.model_dir).map_err(DenseError::from)?;
    let (linked, copied) = folder
        .install(&writer.staging_dir().join(MODEL_PART))
        .map_err(DenseError::from)?;
    writer.record_folder(MODEL_PART).map_err(DenseError::from)?;
    let encoder =
        TransformerEncoder::from_folder(folder, choice.batch_size).map_err(DenseError::from)?;
    let identity = encoder.identity().clone();
    let load_seconds = started.elapsed().as_secs_f64();

    let started = Instant::now();
    let (cache, cache_note) = previous_cache(index_dir, &identity);
    let texts: Vec<String> = library
        .declarations
        .iter()
        .map(|d| premise_text(library, tokenizer, d.id))
        .collect();
    let keys: Vec<TextKey> = texts.iter().map(|t| text_key(t)).collect();
    let mut missing: Vec<usize> = Vec::new();
    let mut seen = std::collections::HashSet::new();
    let mut reused = std::collections::HashSet::new();
    for (i, key) in keys.iter().enumerate() {
        if cache.get(key).is_some() {
            reused.insert(*key);
        } else if seen.insert(*key) {
            missing.push(i);
        }
    }
    let missing_texts: Vec<&str> = missing.iter().map(|&i| texts[i].as_str()).collect();
    let computed = encoder
        .encode_texts(&missing_texts, |_| {})
        .map_err(DenseError::from)?;
    let mut fresh = std::collections::HashMap::new();
    for (&i, v) in missing.iter().zip(computed) {
        fresh.insert(keys[i], v);
    }
    let mut set = VectorSet::new(identity.dim)?;
    for key in &keys {
        let v = cache
            .get(key)
            .or_else(|| fresh.get(key).map(Vec::as_slice))
            .ok_or_else(|| DenseError::BadVector {
                what: "transformer embeddings".into(),
                message: "a declaration's text was neither cached nor embedded".into(),
            })?;
        set.push(v)?;
    }
    let vectors = VectorIndex::build(set, &super::vector_params(keys.len()))?;
    cache::save_text_keys(writer, &identity.fingerprint, &keys)?;
    let part = DensePart {
        encoder: DenseEncoder::Transformer(Box::new(encoder)),
        vectors,
        training_goals: Vec::new(),
    };
    part.save(writer)?;
    let summary = TransformerSummary {
        encoder: "transformer (candle BERT)".into(),
        dim: identity.dim,
        batch_size: choice.batch_size,
        statements: keys.len(),
        reused: reused.len(),
        computed: missing.len(),
        cache: cache_note,
        model_files_linked: linked,
        model_files_copied: copied,
        vector_index: match part.vectors {
            VectorIndex::Exact(_) => "exact".into(),
            VectorIndex::Hnsw(_) => "hnsw".into(),
        },
        load_seconds,
        encode_seconds: started.elapsed().as_secs_f64(),
        model: identity,
    };
    Ok((part, summary))
}

/// Loads the generation's copy of the model and checks it is the model its manifest
/// recorded (file by file).
pub fn load_transformer(generation: &Generation) -> Result<TransformerEncoder, DenseError> {
    let recorded = generation
        .manifest
        .settings
        .get("dense")
        .and_then(|d| serde_json::from_value::<TransformerSummary>(d.clone()).ok())
        .ok_or_else(|| DenseError::Decode {
            what: "transformer model identity",
            message: format!(
                "the manifest of `{}` lists `{MODEL_PART}` but records no model identity \
                 under `dense`",
                generation.dir.display()
            ),
        })?;
    let folder = ModelFolder::read(&generation.dir.join(MODEL_PART))?;
    folder.check_identity(&recorded.model)?;
    if recorded.batch_size == 0 {
        return Err(TransformerError::BatchSize.into());
    }
    Ok(TransformerEncoder::from_folder(
        folder,
        recorded.batch_size,
    )?)
}
