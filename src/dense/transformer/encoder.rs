//! Running a BERT sentence-embedding model on the CPU with candle.
//!
//! Takes a [`ModelFolder`] and a batch size; gives a [`TransformerEncoder`] that turns texts
//! into the model's sentence vectors: tokenised with the model's own `tokenizer.json`
//! (truncated to the model's maximum sequence length, padded to the longest text of each
//! batch), run through candle's BERT, pooled with the attention mask and normalised as the
//! model says. Texts are batched longest first, as sentence-transformers does, so a batch
//! wastes little on padding; the vectors come back in the order given. It deliberately
//! knows nothing of declarations or caches: callers decide what text a statement is.

use candle_core::{DType, Device, Tensor};
use candle_nn::VarBuilder;
use candle_transformers::models::bert::BertModel;
use tokenizers::{PaddingParams, PaddingStrategy, Tokenizer, TruncationParams};

use super::model::{ModelFolder, ModelIdentity, TOKENIZER_FILE, WEIGHTS_FILE};
use super::pooling::l2_normalise;
use super::TransformerError;
use crate::dense::Encoder;

/// Texts per forward pass unless told otherwise: large enough to amortise the per-call
/// cost of the matrix kernels, small enough that a batch of 256-token texts stays in tens
/// of megabytes.
pub const DEFAULT_BATCH_SIZE: usize = 32;

/// A loaded sentence-embedding model.
pub struct TransformerEncoder {
    model: BertModel,
    tokenizer: Tokenizer,
    identity: ModelIdentity,
    batch_size: usize,
    folder: std::path::PathBuf,
}

impl std::fmt::Debug for TransformerEncoder {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("TransformerEncoder")
            .field("identity", &self.identity)
            .field("batch_size", &self.batch_size)
            .finish_non_exhaustive()
    }
}

/// The text the model reads for a list of the shared tokenizer's tokens: the tokens joined
/// by spaces. Identifiers arrive split into words and symbols spelled as words (`≤` gives
/// `le`), which a model trained on English prose reads better than raw proof syntax, and
/// goals and premises are read the same way.
pub fn text_of_tokens(tokens: &[&str]) -> String {
    tokens.join(" ")
}

impl TransformerEncoder {
    /// Reads the model folder `dir` and loads it with `batch_size` texts per forward pass.
    pub fn load(dir: &std::path::Path, batch_size: usize) -> Result<Self, TransformerError> {
        Self::from_folder(ModelFolder::read(dir)?, batch_size)
    }

    /// Loads a model folder already read.
    pub fn from_folder(folder: ModelFolder, batch_size: usize) -> Result<Self, TransformerError> {
        if batch_size == 0 {
            return Err(TransformerError::BatchSize);
        }
        let weights_path = folder.dir.join(WEIGHTS_FILE);
        let tokenizer_path = folder.dir.join(TOKENIZER_FILE);
        let mut tokenizer = Tokenizer::from_bytes(&folder.tokenizer_bytes).map_err(|e| {
            TransformerError::BadFile {
                path: tokenizer_path.clone(),
                message: format!("not a tokenizer: {e}"),
            }
        })?;
        let pad_id = tokenizer
            .get_padding()
            .map(|p| p.pad_id)
            .unwrap_or(folder.config.pad_token_id as u32);
        let pad_token = tokenizer
            .get_padding()
            .map(|p| p.pad_token.clone())
            .unwrap_or_else(|| "[PAD]".to_string());
        tokenizer.with_padding(Some(PaddingParams {
            strategy: PaddingStrategy::BatchLongest,
            pad_id,
            pad_token,
            ..PaddingParams::default()
        }));
        tokenizer
            .with_truncation(Some(TruncationParams {
                max_length: folder.identity.max_seq_length,
                ..TruncationParams::default()
            }))
            .map_err(|e| TransformerError::BadFile {
                path: tokenizer_path,
                message: format!("cannot truncate to {}: {e}", folder.identity.max_seq_length),
            })?;
        let vb = VarBuilder::from_buffered_safetensors(folder.weights, DType::F32, &Device::Cpu)
            .map_err(|e| TransformerError::Weights {
                path: weights_path.clone(),
                message: format!("not a safetensors file: {e}"),
            })?;
        let model = BertModel::load(vb, &folder.config).map_err(|e| TransformerError::Weights {
            path: weights_path,
            message: format!("does not match `config.json`: {e}"),
        })?;
        Ok(TransformerEncoder {
            model,
            tokenizer,
            identity: folder.identity,
            batch_size,
            folder: folder.dir,
        })
    }

    /// Who the model is: files, checksums, dimension, pooling.
    pub fn identity(&self) -> &ModelIdentity {
        &self.identity
    }

    /// Texts per forward pass.
    pub fn batch_size(&self) -> usize {
        self.batch_size
    }

    /// The vectors of `texts`, in order, computed `batch_size` at a time, longest texts
    /// first; `progress` is told how many are done after each batch.
    pub fn encode_texts(
        &self,
        texts: &[&str],
        mut progress: impl FnMut(usize),
    ) -> Result<Vec<Vec<f32>>, TransformerError> {
        let mut order: Vec<usize> = (0..texts.len()).collect();
        order.sort_by_key(|&i| std::cmp::Reverse(texts[i].len()));
        let mut out: Vec<Vec<f32>> = vec![Vec::new(); texts.len()];
        let mut done = 0;
        for chunk in order.chunks(self.batch_size) {
            let batch: Vec<&str> = chunk.iter().map(|&i| texts[i]).collect();
            for (&i, v) in chunk.iter().zip(self.encode_batch(&batch)?) {
                out[i] = v;
            }
            done += chunk.len();
            progress(done);
        }
        Ok(out)
    }

    /// One forward pass over `texts` (all of them, whatever the batch size).
    pub fn encode_batch(&self, texts: &[&str]) -> Result<Vec<Vec<f32>>, TransformerError> {
        if texts.is_empty() {
            return Ok(Vec::new());
        }
        let forward = |message: String| TransformerError::Forward {
            texts: texts.len(),
            message,
        };
        let encodings = self
            .tokenizer
            .encode_batch(texts.to_vec(), true)
            .map_err(|e| TransformerError::Tokenize {
                path: self.folder.join(TOKENIZER_FILE),
                message: e.to_string(),
            })?;
        let width = encodings.first().map_or(0, |e| e.get_ids().len());
        let mut ids = Vec::with_capacity(texts.len() * width);
        let mut types = Vec::with_capacity(texts.len() * width);
        let mut mask = Vec::with_capacity(texts.len() * width);
        for e in &encodings {
            if e.get_ids().len() != width {
                return Err(forward(
                    "the tokenizer padded the batch unevenly".to_string(),
                ));
            }
            ids.extend_from_slice(e.get_ids());
            types.extend_from_slice(e.get_type_ids());
            mask.extend_from_slice(e.get_attention_mask());
        }
        let shape = (texts.len(), width);
        let run = || -> candle_core::Result<Vec<Vec<f32>>> {
            let ids = Tensor::from_vec(ids, shape, &Device::Cpu)?;
            let types = Tensor::from_vec(types, shape, &Device::Cpu)?;
            let mask = Tensor::from_vec(mask, shape, &Device::Cpu)?;
            let hidden = self.model.forward(&ids, &types, Some(&mask))?;
            let mut pooled = self.identity.pooling.pool(&hidden, &mask)?;
            if self.identity.normalize {
                pooled = l2_normalise(&pooled)?;
            }
            pooled.to_vec2::<f32>()
        };
        run().map_err(|e| forward(e.to_string()))
    }

    /// The vector of one token list (zeros for an empty one), or the error of the forward
    /// pass.
    pub fn encode_tokens(&self, tokens: &[&str]) -> Result<Vec<f32>, TransformerError> {
        if tokens.is_empty() {
            return Ok(vec![0.0; self.identity.dim]);
        }
        let text = text_of_tokens(tokens);
        let mut rows = self.encode_batch(&[text.as_str()])?;
        Ok(rows.pop().unwrap_or_else(|| vec![0.0; self.identity.dim]))
    }
}

impl Encoder for TransformerEncoder {
    fn dim(&self) -> usize {
        self.identity.dim
    }

    /// The model's vector of the joined tokens. A forward pass that fails (which a loaded
    /// model does not do on a tokenizer's own output) gives the zero vector, which the
    /// dense search treats as "no dense signal" for this goal.
    fn encode_goal(&self, tokens: &[&str]) -> Vec<f32> {
        self.encode_tokens(tokens)
            .unwrap_or_else(|_| vec![0.0; self.identity.dim])
    }

    /// The same as [`Encoder::encode_goal`]: one model reads both sides.
    fn encode_premise(&self, tokens: &[&str]) -> Vec<f32> {
        self.encode_goal(tokens)
    }
}
