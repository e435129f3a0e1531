//! Pooling a transformer's token vectors into one sentence vector, as a sentence-embedding
//! model's pooling configuration (`1_Pooling/config.json`) says.
//!
//! Takes the pooling configuration's bytes, then per batch the last hidden states
//! `[batch, tokens, dim]` and the attention mask `[batch, tokens]`; gives one vector per
//! text (`[batch, dim]`), L2-normalised when the model lists a Normalize module. Padding
//! never counts: the mask excludes it from the mean and the max. It deliberately reads
//! exactly one pooling mode; a configuration asking for several (concatenated) or for a mode
//! quarry does not implement is refused, rather than producing vectors the model's authors
//! would not recognise.

use std::path::Path;

use candle_core::{DType, Tensor, D};
use serde::{Deserialize, Serialize};

use super::TransformerError;

/// How token vectors become a sentence vector.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Pooling {
    /// The mean of the non-padding token vectors.
    Mean,
    /// The vector of the first token (`[CLS]`).
    Cls,
    /// The component-wise maximum over the non-padding token vectors.
    Max,
}

/// The fields of a pooling configuration quarry reads; a mode missing from the file is off.
#[derive(Deserialize)]
struct PoolingConfig {
    word_embedding_dimension: usize,
    #[serde(default)]
    pooling_mode_cls_token: bool,
    #[serde(default)]
    pooling_mode_mean_tokens: bool,
    #[serde(default)]
    pooling_mode_max_tokens: bool,
    #[serde(default)]
    pooling_mode_mean_sqrt_len_tokens: bool,
    #[serde(default)]
    pooling_mode_weightedmean_tokens: bool,
    #[serde(default)]
    pooling_mode_lasttoken: bool,
}

impl Pooling {
    /// The pooling mode and the token-vector dimension a pooling configuration declares
    /// (`path` is named in errors).
    pub fn from_config(bytes: &[u8], path: &Path) -> Result<(Pooling, usize), TransformerError> {
        let config: PoolingConfig =
            serde_json::from_slice(bytes).map_err(|e| TransformerError::BadFile {
                path: path.to_path_buf(),
                message: format!("not a pooling configuration: {e}"),
            })?;
        let unsupported = [
            (
                "mean_sqrt_len_tokens",
                config.pooling_mode_mean_sqrt_len_tokens,
            ),
            (
                "weightedmean_tokens",
                config.pooling_mode_weightedmean_tokens,
            ),
            ("lasttoken", config.pooling_mode_lasttoken),
        ];
        if let Some((name, _)) = unsupported.iter().find(|(_, on)| *on) {
            return Err(TransformerError::BadFile {
                path: path.to_path_buf(),
                message: format!(
                    "pooling mode `{name}` is not supported (quarry pools by mean, cls or max)"
                ),
            });
        }
        let modes: Vec<Pooling> = [
            (Pooling::Mean, config.pooling_mode_mean_tokens),
            (Pooling::Cls, config.pooling_mode_cls_token),
            (Pooling::Max, config.pooling_mode_max_tokens),
        ]
        .into_iter()
        .filter_map(|(mode, on)| on.then_some(mode))
        .collect();
        match modes.as_slice() {
            [mode] => Ok((*mode, config.word_embedding_dimension)),
            [] => Err(TransformerError::BadFile {
                path: path.to_path_buf(),
                message: "sets no pooling mode (one of mean, cls or max must be true)".into(),
            }),
            _ => Err(TransformerError::BadFile {
                path: path.to_path_buf(),
                message: format!(
                    "sets {} pooling modes at once; quarry reads exactly one of mean, cls or max",
                    modes.len()
                ),
            }),
        }
    }

    /// The sentence vectors `[batch, dim]` of `hidden` `[batch, tokens, dim]` under `mask`
    /// `[batch, tokens]` (1 for a real token, 0 for padding; any numeric type).
    pub fn pool(self, hidden: &Tensor, mask: &Tensor) -> candle_core::Result<Tensor> {
        let mask = mask.to_dtype(hidden.dtype())?.unsqueeze(D::Minus1)?;
        match self {
            Pooling::Mean => {
                let sum = hidden.broadcast_mul(&mask)?.sum(1)?;
                // sentence-transformers clamps the token count at 1e-9 so an all-padding row
                // divides by a tiny number instead of zero.
                let count = mask.sum(1)?.clamp(1e-9, f64::MAX)?;
                sum.broadcast_div(&count)
            }
            Pooling::Cls => hidden.narrow(1, 0, 1)?.squeeze(1),
            Pooling::Max => {
                // Padding positions become -1e9 before the maximum, as sentence-transformers
                // does, so they never win.
                let keep = mask.broadcast_as(hidden.shape())?.to_dtype(DType::U8)?;
                let floor = Tensor::full(-1e9f32, hidden.shape(), hidden.device())?
                    .to_dtype(hidden.dtype())?;
                keep.where_cond(hidden, &floor)?.max(1)
            }
        }
    }
}

/// Each row of `vectors` `[batch, dim]` divided by its L2 norm (a norm under 1e-12 counts as
/// 1e-12, as PyTorch's `normalize` does).
pub fn l2_normalise(vectors: &Tensor) -> candle_core::Result<Tensor> {
    let norm = vectors
        .sqr()?
        .sum_keepdim(1)?
        .sqrt()?
        .clamp(1e-12, f64::MAX)?;
    vectors.broadcast_div(&norm)
}

#[cfg(test)]
mod tests {
    use super::*;
    use candle_core::Device;

    fn config(modes: &str) -> Vec<u8> {
        format!("{{\"word_embedding_dimension\": 2, {modes}}}").into_bytes()
    }

    /// Two texts of three token slots, two dimensions; the second text's last slot is
    /// padding holding a large value that must not count.
    fn batch() -> (Tensor, Tensor) {
        let hidden = Tensor::new(
            &[
                [[1f32, 2.0], [3.0, -4.0], [5.0, 0.0]],
                [[2.0, 2.0], [4.0, 6.0], [100.0, 100.0]],
            ],
            &Device::Cpu,
        )
        .expect("hidden states");
        let mask = Tensor::new(&[[1u32, 1, 1], [1, 1, 0]], &Device::Cpu).expect("mask");
        (hidden, mask)
    }

    fn rows(t: &Tensor) -> Vec<Vec<f32>> {
        t.to_vec2::<f32>().expect("a matrix")
    }

    /// Worked by hand from the definitions in sentence-transformers' `Pooling` module
    /// (mean over unmasked tokens, first token, max over unmasked tokens).
    #[test]
    fn pooling_follows_the_mask() {
        let (hidden, mask) = batch();
        let mean = rows(&Pooling::Mean.pool(&hidden, &mask).expect("mean"));
        assert_eq!(mean, vec![vec![3.0, -2.0 / 3.0], vec![3.0, 4.0]]);
        let cls = rows(&Pooling::Cls.pool(&hidden, &mask).expect("cls"));
        assert_eq!(cls, vec![vec![1.0, 2.0], vec![2.0, 2.0]]);
        let max = rows(&Pooling::Max.pool(&hidden, &mask).expect("max"));
        assert_eq!(max, vec![vec![5.0, 2.0], vec![4.0, 6.0]]);
    }

    /// (3, 4) has norm 5 (common practice); a zero row stays zero instead of dividing by 0.
    #[test]
    fn normalising_divides_by_the_norm() {
        let v = Tensor::new(&[[3f32, 4.0], [0.0, 0.0]], &Device::Cpu).expect("rows");
        let n = rows(&l2_normalise(&v).expect("normalise"));
        assert_eq!(n, vec![vec![0.6, 0.8], vec![0.0, 0.0]]);
    }

    #[test]
    fn configuration_names_exactly_one_mode() {
        let path = Path::new("1_Pooling/config.json");
        let (mode, dim) = Pooling::from_config(&config("\"pooling_mode_mean_tokens\": true"), path)
            .expect("mean pooling");
        assert_eq!((mode, dim), (Pooling::Mean, 2));
        let (mode, _) = Pooling::from_config(&config("\"pooling_mode_cls_token\": true"), path)
            .expect("cls pooling");
        assert_eq!(mode, Pooling::Cls);
        for bad in [
            "\"pooling_mode_mean_tokens\": false",
            "\"pooling_mode_mean_tokens\": true, \"pooling_mode_max_tokens\": true",
            "\"pooling_mode_lasttoken\": true",
        ] {
            let err = Pooling::from_config(&config(bad), path).expect_err(bad);
            assert!(err.to_string().contains("1_Pooling/config.json"), "{err}");
        }
        let err = Pooling::from_config(b"[1, 2]", path).expect_err("not an object");
        assert!(err.to_string().contains("not a pooling configuration"));
    }
}
