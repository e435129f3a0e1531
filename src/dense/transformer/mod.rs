//! The transformer encoder: a pretrained BERT sentence-embedding model read from a local
//! folder and run on the CPU with candle.
//!
//! Takes a model folder as sentence-transformers saves one (see [`model`]); gives a
//! [`TransformerEncoder`] implementing [`crate::dense::Encoder`] (the same model reads goals
//! and premises), batched encoding of many texts, the model's [`ModelIdentity`] for the
//! index manifest, and an [`EmbeddingCache`] so that a rebuild embeds only texts it has not
//! seen. Every problem with the folder (a missing file, dimensions that disagree, weights
//! that are not safetensors or do not fit the configuration) is a [`TransformerError`]
//! naming the file; nothing here panics on a model's contents.
//!
//! It deliberately does not train or fine-tune, download models, or run on a GPU: the
//! folder is given, and the index keeps its own copy so queries never need the original.

pub mod cache;
pub mod encoder;
pub mod model;
pub mod pooling;

use std::path::PathBuf;

pub use cache::{text_key, CacheSource, EmbeddingCache, TextKey, TEXT_KEYS_PART};
pub use encoder::{text_of_tokens, TransformerEncoder, DEFAULT_BATCH_SIZE};
pub use model::{FileSum, ModelFolder, ModelIdentity};
pub use pooling::Pooling;

/// What is wrong with a model folder or a run of the model, naming the file.
#[derive(Debug, thiserror::Error)]
pub enum TransformerError {
    /// The model folder is not a folder.
    #[error("model folder `{0}` does not exist or is not a folder")]
    NotAFolder(PathBuf),
    /// A file the model needs is absent.
    #[error("model folder `{dir}` has no `{file}` ({role})", dir = dir.display())]
    MissingFile {
        dir: PathBuf,
        file: String,
        role: &'static str,
    },
    /// A file could not be read.
    #[error("model file `{path}`: {source}", path = path.display())]
    Io {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// A file is there but says something quarry cannot use.
    #[error("model file `{path}`: {message}", path = path.display())]
    BadFile { path: PathBuf, message: String },
    /// The pooling configuration's dimension is not the model's hidden size.
    #[error(
        "model file `{path}`: word_embedding_dimension is {found}, but `config.json` has \
         hidden_size {expected}",
        path = path.display()
    )]
    Dimensions {
        path: PathBuf,
        found: usize,
        expected: usize,
    },
    /// The weights are not safetensors, or do not fit the configuration.
    #[error("model weights `{path}`: {message}", path = path.display())]
    Weights { path: PathBuf, message: String },
    /// An index's copy of the model is not the model its manifest recorded.
    #[error(
        "model file `{path}` is not the one the index was built with (checksum differs); \
         rebuild the index",
        path = path.display()
    )]
    NotTheRecordedModel { path: PathBuf },
    /// The batch size is 0.
    #[error("the transformer batch size must be at least 1")]
    BatchSize,
    /// The tokenizer refused a text.
    #[error("tokenizing with `{path}`: {message}", path = path.display())]
    Tokenize { path: PathBuf, message: String },
    /// The forward pass failed.
    #[error("running the model on {texts} texts: {message}")]
    Forward { texts: usize, message: String },
}
