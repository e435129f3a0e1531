//! The vector index the dense signal queries: exact below a size threshold, HNSW above.
//!
//! Takes premise vectors (unit length, id = premise order) and [`IndexParams`]; gives
//! top-k `(id, cosine)` search and its parts in an index generation:
//!
//! ```text
//! gen-*/dense/encoder.bin   the learned encoder (LearnedEncoder::to_bytes)
//! gen-*/dense/vectors.bin   premise vectors, f32 little-endian (VectorSet::to_bytes)
//! gen-*/dense/hnsw.bin      the HNSW graph, only when the index is HNSW
//! ```
//!
//! Parts go through `GenerationWriter::write_part` and come back through
//! `Generation::read_part`, so the manifest's checksums cover them. Loading never
//! rebuilds the graph. It does not encode anything: the caller gives vectors.

use crate::library::store::{Generation, GenerationWriter};

use super::exact::ExactIndex;
use super::hnsw::{HnswIndex, HnswParams};
use super::learned::LearnedEncoder;
use super::vectors::VectorSet;
use super::DenseError;

/// The encoder's part in a generation.
pub const ENCODER_PART: &str = "dense/encoder.bin";
/// The premise vectors' part in a generation.
pub const VECTORS_PART: &str = "dense/vectors.bin";
/// The HNSW graph's part in a generation (absent for an exact index).
pub const GRAPH_PART: &str = "dense/hnsw.bin";

/// How to index a set of vectors.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct IndexParams {
    /// Fewer vectors than this are scanned exactly: a scan of 5,000 vectors of dimension
    /// 256 is about a million multiply-adds, well under a millisecond on one core, and is
    /// never wrong. Default 5,000.
    pub exact_below: usize,
    /// The graph's settings above the threshold.
    pub hnsw: HnswParams,
}

impl Default for IndexParams {
    fn default() -> Self {
        IndexParams {
            exact_below: 5_000,
            hnsw: HnswParams::default(),
        }
    }
}

/// A searchable set of premise vectors.
#[derive(Clone, Debug, PartialEq)]
pub enum VectorIndex {
    Exact(ExactIndex),
    Hnsw(HnswIndex),
}

impl VectorIndex {
    /// Indexes `vectors`: exactly when there are fewer than `params.exact_below`, else with
    /// an HNSW graph.
    pub fn build(vectors: VectorSet, params: &IndexParams) -> Result<VectorIndex, DenseError> {
        if vectors.len() < params.exact_below {
            params.hnsw.validate()?;
            Ok(VectorIndex::Exact(ExactIndex::new(vectors)))
        } else {
            Ok(VectorIndex::Hnsw(HnswIndex::build(vectors, params.hnsw)?))
        }
    }

    /// The `k` ids with the highest cosine with `query` (exact, or approximately for HNSW),
    /// best first.
    pub fn search(&self, query: &[f32], k: usize) -> Vec<(u32, f32)> {
        match self {
            VectorIndex::Exact(e) => e.search(query, k),
            VectorIndex::Hnsw(h) => h.search(query, k),
        }
    }

    /// The vectors indexed, by id.
    pub fn vectors(&self) -> &VectorSet {
        match self {
            VectorIndex::Exact(e) => e.vectors(),
            VectorIndex::Hnsw(h) => h.vectors(),
        }
    }

    /// Writes the index's parts ([`VECTORS_PART`], and [`GRAPH_PART`] for HNSW).
    pub fn save(&self, writer: &mut GenerationWriter) -> Result<(), DenseError> {
        writer.write_part(VECTORS_PART, &self.vectors().to_bytes())?;
        if let VectorIndex::Hnsw(h) = self {
            writer.write_part(GRAPH_PART, &h.graph_bytes())?;
        }
        Ok(())
    }

    /// Reads the index saved by [`VectorIndex::save`]: HNSW when the generation lists a
    /// graph part, exact otherwise.
    pub fn load(generation: &Generation) -> Result<VectorIndex, DenseError> {
        let vectors = VectorSet::from_bytes(&generation.read_part(VECTORS_PART)?)?;
        if generation.manifest.parts.contains_key(GRAPH_PART) {
            let graph = generation.read_part(GRAPH_PART)?;
            Ok(VectorIndex::Hnsw(HnswIndex::from_parts(vectors, &graph)?))
        } else {
            Ok(VectorIndex::Exact(ExactIndex::new(vectors)))
        }
    }
}

/// Writes the encoder's part ([`ENCODER_PART`]).
pub fn save_encoder(
    writer: &mut GenerationWriter,
    encoder: &LearnedEncoder,
) -> Result<(), DenseError> {
    writer.write_part(ENCODER_PART, &encoder.to_bytes())?;
    Ok(())
}

/// Reads the encoder saved by [`save_encoder`].
pub fn load_encoder(generation: &Generation) -> Result<LearnedEncoder, DenseError> {
    LearnedEncoder::from_bytes(&generation.read_part(ENCODER_PART)?)
}

#[cfg(test)]
mod tests {
    use std::collections::BTreeMap;

    use super::*;
    use crate::dense::learned::EncoderSettings;
    use crate::dense::synthetic::clustered_vectors;
    use crate::library::model::Library;
    use crate::library::store::open_generation;

    fn save_and_load(
        index: &VectorIndex,
        encoder: &LearnedEncoder,
    ) -> (VectorIndex, LearnedEncoder) {
        let dir = tempfile::tempdir().expect("temporary folder");
        let library = Library::default();
        let mut writer = GenerationWriter::create(dir.path(), "dense-test").expect("writer");
        index.save(&mut writer).expect("save index");
        save_encoder(&mut writer, encoder).expect("save encoder");
        writer.commit(&library, BTreeMap::new()).expect("commit");
        let generation = open_generation(dir.path()).expect("open");
        assert!(generation.verify_all().is_ok());
        (
            VectorIndex::load(&generation).expect("load index"),
            load_encoder(&generation).expect("load encoder"),
        )
    }

    #[test]
    fn threshold_picks_the_kind_and_generations_round_trip() {
        let settings = EncoderSettings {
            buckets: 256,
            dim: 8,
            seed: 1,
        };
        let encoder =
            LearnedEncoder::initial(settings, &[vec!["tick", "task"]]).expect("valid settings");
        let vectors = clustered_vectors(2, 300, 8, 5, 0.4).expect("valid vectors");
        let exact = VectorIndex::build(vectors.clone(), &IndexParams::default()).expect("valid");
        assert!(matches!(exact, VectorIndex::Exact(_)));
        let params = IndexParams {
            exact_below: 100,
            ..IndexParams::default()
        };
        let hnsw = VectorIndex::build(vectors, &params).expect("valid");
        assert!(matches!(hnsw, VectorIndex::Hnsw(_)));
        for index in [exact, hnsw] {
            let (back, enc) = save_and_load(&index, &encoder);
            assert_eq!(back, index);
            assert_eq!(enc, encoder);
            let q = index
                .vectors()
                .get(3)
                .map(<[f32]>::to_vec)
                .unwrap_or_default();
            assert_eq!(back.search(&q, 10), index.search(&q, 10));
        }
    }
}
