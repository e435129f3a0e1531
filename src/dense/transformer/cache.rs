//! The embedding cache: a rebuild re-embeds only the statements whose text changed.
//!
//! Takes the texts a build embedded (one per vector row) and, when rebuilding, the previous
//! generation of the same index folder; gives an [`EmbeddingCache`] from BLAKE3 of a text to
//! its vector. A generation stores only the keys ([`TEXT_KEYS_PART`]: the model's
//! fingerprint and one 32-byte key per row of `dense/vectors.bin`), since the vectors are
//! already there: the cache costs 32 bytes a declaration, not a second copy of the vectors.
//! Vectors of another model (a different fingerprint) are never re-used. It deliberately
//! does not decide what text a declaration is, nor run the model.

use std::collections::HashMap;

use serde::{Deserialize, Serialize};

use crate::dense::index::VECTORS_PART;
use crate::dense::{DenseError, VectorSet};
use crate::library::store::{Generation, GenerationWriter};

/// The part holding the text key of every vector row.
pub const TEXT_KEYS_PART: &str = "dense/text_keys.bin";

/// The BLAKE3 of a text, the key of its vector.
pub type TextKey = [u8; 32];

/// The key of `text`.
pub fn text_key(text: &str) -> TextKey {
    *blake3::hash(text.as_bytes()).as_bytes()
}

#[derive(Serialize, Deserialize)]
struct TextKeys {
    model: String,
    keys: Vec<TextKey>,
}

/// Vectors by text key, all of one model.
#[derive(Debug, Default)]
pub struct EmbeddingCache {
    vectors: HashMap<TextKey, Vec<f32>>,
}

/// Where a build's cache came from, for the build report.
#[derive(Debug)]
pub enum CacheSource {
    /// The previous generation's vectors, this many distinct texts.
    Previous(usize),
    /// Nothing to re-use, and why.
    Empty(String),
}

impl EmbeddingCache {
    /// The vector of a text key, if cached.
    pub fn get(&self, key: &TextKey) -> Option<&[f32]> {
        self.vectors.get(key).map(Vec::as_slice)
    }

    /// Distinct texts cached.
    pub fn len(&self) -> usize {
        self.vectors.len()
    }

    /// Whether nothing is cached.
    pub fn is_empty(&self) -> bool {
        self.vectors.is_empty()
    }

    /// The cache of a generation built with the model of fingerprint `model` and vectors of
    /// `dim`: empty (with the reason) when it was built otherwise or has no keys; an error
    /// only when its parts are damaged.
    pub fn from_generation(
        generation: &Generation,
        model: &str,
        dim: usize,
    ) -> Result<(EmbeddingCache, CacheSource), DenseError> {
        let empty = |why: &str| Ok((EmbeddingCache::default(), CacheSource::Empty(why.into())));
        if !generation.manifest.parts.contains_key(TEXT_KEYS_PART) {
            return empty("the previous generation has no transformer embeddings");
        }
        let keys: TextKeys =
            postcard::from_bytes(&generation.read_part(TEXT_KEYS_PART)?).map_err(|e| {
                DenseError::Decode {
                    what: "embedding cache keys",
                    message: e.to_string(),
                }
            })?;
        if keys.model != model {
            return empty("the previous generation was embedded by another model");
        }
        let vectors = VectorSet::from_bytes(&generation.read_part(VECTORS_PART)?)?;
        if vectors.len() != keys.keys.len() || vectors.dim() != dim {
            return Err(DenseError::BadVector {
                what: "previous embedding cache".into(),
                message: format!(
                    "{} keys for {} vectors of dimension {} (the model's is {dim})",
                    keys.keys.len(),
                    vectors.len(),
                    vectors.dim()
                ),
            });
        }
        let mut cache = EmbeddingCache::default();
        for (i, key) in keys.keys.iter().enumerate() {
            if let Some(v) = vectors.get(i as u32) {
                cache.vectors.entry(*key).or_insert_with(|| v.to_vec());
            }
        }
        let n = cache.len();
        Ok((cache, CacheSource::Previous(n)))
    }
}

/// Writes the text key of every vector row, under the model's fingerprint.
pub fn save_text_keys(
    writer: &mut GenerationWriter,
    model: &str,
    keys: &[TextKey],
) -> Result<(), DenseError> {
    let bytes = postcard::to_stdvec(&TextKeys {
        model: model.to_string(),
        keys: keys.to_vec(),
    })
    .map_err(|e| DenseError::Decode {
        what: "embedding cache keys",
        message: e.to_string(),
    })?;
    writer.write_part(TEXT_KEYS_PART, &bytes)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use std::collections::BTreeMap;

    use super::*;
    use crate::library::model::Library;
    use crate::library::store::open_generation;

    fn generation_with(model: &str, rows: &[Vec<f32>], texts: &[&str]) -> tempfile::TempDir {
        let dir = tempfile::tempdir().expect("temporary folder");
        let mut writer = GenerationWriter::create(dir.path(), "cache-test").expect("writer");
        let set = VectorSet::from_rows(2, rows).expect("rows");
        writer
            .write_part(VECTORS_PART, &set.to_bytes())
            .expect("vectors");
        let keys: Vec<TextKey> = texts.iter().map(|t| text_key(t)).collect();
        save_text_keys(&mut writer, model, &keys).expect("keys");
        writer
            .commit(&Library::default(), BTreeMap::new())
            .expect("commit");
        dir
    }

    #[test]
    fn previous_vectors_come_back_by_text() {
        let rows = vec![vec![1.0, 0.0], vec![0.0, 1.0], vec![1.0, 0.0]];
        let dir = generation_with("m1", &rows, &["ring push", "ledger debit", "ring push"]);
        let generation = open_generation(dir.path()).expect("open");
        let (cache, source) = EmbeddingCache::from_generation(&generation, "m1", 2).expect("read");
        assert!(matches!(source, CacheSource::Previous(2)), "{source:?}");
        assert_eq!(cache.get(&text_key("ledger debit")), Some(&[0.0, 1.0][..]));
        assert_eq!(cache.get(&text_key("ring pop")), None);
        let (other, source) = EmbeddingCache::from_generation(&generation, "m2", 2).expect("read");
        assert!(other.is_empty());
        assert!(matches!(source, CacheSource::Empty(_)));
        let err = EmbeddingCache::from_generation(&generation, "m1", 3).expect_err("wrong dim");
        assert!(err.to_string().contains("dimension"), "{err}");
    }

    /// BLAKE3 of the empty string, from the BLAKE3 specification's test vectors.
    #[test]
    fn keys_are_blake3() {
        let hex: String = text_key("").iter().map(|b| format!("{b:02x}")).collect();
        assert_eq!(
            hex,
            "af1349b9f5f9a1a6a0404dea36dcc9499bcb25c9adc112b7cc9a93cae41f3262"
        );
    }
}
