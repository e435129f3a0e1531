//! The dense retrieval signal: goals and premises as unit vectors, and nearest neighbours.
//!
//! Takes already-tokenized statements (`&[&str]` token lists: tokenization belongs to
//! another stage) and, for training, the library's own proofs as (goal, premise used)
//! pairs; gives
//! - an [`Encoder`] that maps a goal or a premise to an L2-normalised vector: either
//!   [`LearnedEncoder`], trained on the CPU ([`train::train`]) and saved as bytes
//!   ([`LearnedEncoder::to_bytes`]), or [`transformer::TransformerEncoder`], a pretrained
//!   BERT sentence-embedding model read from a folder and run with candle;
//! - a [`VectorIndex`] over premise vectors: an exact cosine scan for small libraries, an
//!   HNSW graph (our own build, see `hnsw_build`) for large ones, saved into and loaded from an index
//!   generation ([`VectorIndex::save`], [`VectorIndex::load`]).
//!
//! It deliberately does not tokenize, read source files, fuse its scores with other
//! signals, or pick hard negatives: the caller gives those (from BM25, say).
//!
//! ```
//! use quarry::dense::synthetic::ring_and_scheduler_task;
//! use quarry::dense::{train, EncoderSettings, Encoder, IndexParams, TrainConfig, VectorIndex, VectorSet};
//!
//! let (data, _) = ring_and_scheduler_task(1, 40, 30, 0);
//! let config = TrainConfig {
//!     encoder: EncoderSettings { buckets: 1 << 10, dim: 16, seed: 1 },
//!     epochs: 2,
//!     ..TrainConfig::default()
//! };
//! let (encoder, report) = train(&data, &config, None)?;
//! assert_eq!(report.epochs.len(), 2);
//! let rows: Vec<Vec<f32>> = data.premises.iter().map(|p| encoder.encode_premise_tokens(p)).collect();
//! let index = VectorIndex::build(VectorSet::from_rows(16, &rows)?, &IndexParams::default())?;
//! let hits = index.search(&encoder.encode_goal(&["ring_push", "capacity", "size"]), 5);
//! assert_eq!(hits.len(), 5);
//! # Ok::<(), quarry::dense::DenseError>(())
//! ```
//!
//! Everything is deterministic for a seed: the same inputs and settings give the same bytes
//! whatever rayon's thread count, because parallel work is only ever collected in order and
//! reduced sequentially.

mod codec;
pub mod exact;
pub mod features;
pub mod hnsw;
mod hnsw_build;
pub mod index;
pub mod learned;
mod loss;
pub mod recall;
pub mod seeded;
pub mod synthetic;
pub mod train;
pub mod transformer;
pub mod vectors;

pub use exact::ExactIndex;
pub use features::{FeatureBag, FeatureHasher, InverseDocumentFrequency};
pub use hnsw::{HnswIndex, HnswParams};
pub use index::{load_encoder, save_encoder, IndexParams, VectorIndex};
pub use learned::{EncoderSettings, LearnedEncoder};
pub use recall::{recall_against_exact, RecallReport};
pub use train::{
    train, EpochReport, TrainConfig, TrainReport, TrainingData, TrainingPair, Validation,
};
pub use vectors::VectorSet;

use crate::library::store::StoreError;

/// Maps token lists to L2-normalised vectors of one dimension, goal side and premise side.
///
/// The two sides may differ (a goal is matched against premises, not against goals), so a
/// caller encodes goals with [`Encoder::encode_goal`] and the premises of the library with
/// [`Encoder::encode_premise`], and compares them by dot product.
pub trait Encoder: Send + Sync {
    /// The length of every vector this encoder returns.
    fn dim(&self) -> usize;
    /// The vector of a goal's tokens: unit length, or all zeros when no token gives a
    /// feature (an empty goal).
    fn encode_goal(&self, tokens: &[&str]) -> Vec<f32>;
    /// The vector of a premise's statement tokens, as [`Encoder::encode_goal`] for premises.
    fn encode_premise(&self, tokens: &[&str]) -> Vec<f32>;
}

/// Borrows a list of owned tokens as the `&[&str]` the [`Encoder`] methods take.
pub fn token_refs(tokens: &[String]) -> Vec<&str> {
    tokens.iter().map(String::as_str).collect()
}

/// What went wrong in the dense signal, naming the input concerned.
#[derive(Debug, thiserror::Error)]
pub enum DenseError {
    /// A setting is out of range (`field` names it).
    #[error("dense setting `{field}`: {message}")]
    InvalidSetting {
        field: &'static str,
        message: String,
    },
    /// The training data does not hold together (an index out of range, say).
    #[error("dense training data: {0}")]
    TrainingData(String),
    /// A vector has the wrong length or a non-finite value.
    #[error("{what}: {message}")]
    BadVector { what: String, message: String },
    /// Bytes that were meant to be a saved encoder, vector set or graph are not one.
    #[error("cannot read the {what} from bytes: {message}")]
    Decode { what: &'static str, message: String },
    /// Reading or writing the index folder failed.
    #[error(transparent)]
    Store(#[from] StoreError),
    /// The transformer model could not be read or run.
    #[error(transparent)]
    Transformer(#[from] transformer::TransformerError),
}
