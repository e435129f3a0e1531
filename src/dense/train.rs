//! Training the learned encoder on the library's own proofs.
//!
//! Takes goals (theorem statements' tokens), premises (statements' tokens), the pairs
//! (goal, premise its proof uses) and, optionally, hard negatives per pair chosen by the
//! caller (BM25's near misses, say); gives a [`LearnedEncoder`] and a [`TrainReport`] with
//! the mean loss of every epoch and, given a [`Validation`] set, recall@k before and after
//! each epoch.
//!
//! Each batch minimises InfoNCE (van den Oord et al., 2018, "Representation Learning with
//! Contrastive Predictive Coding") over the pair's premise against in-batch and hard
//! negatives, and updates only the rows the batch touched with row-wise Adagrad (one
//! accumulator per row, as in the "row-wise sparse Adagrad" of recommendation-model
//! training: half the memory of element-wise Adagrad, and an untouched row costs nothing).
//! The example order of each epoch is a seeded shuffle; with the same data and
//! [`TrainConfig`] the result is the same bytes whatever rayon's thread count.
//! It does not choose negatives, tokenize, or read the library model.

use std::collections::HashSet;
use std::time::Instant;

use rayon::prelude::*;

use super::exact::ExactIndex;
use super::features::FeatureBag;
use super::learned::{row_slice_mut, EncoderSettings, LearnedEncoder, Side};
use super::loss::{batch_gradient, Example};
use super::seeded::SplitMix64;
use super::vectors::VectorSet;
use super::DenseError;

/// A goal and one premise its proof uses, by index into [`TrainingData`]'s lists.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct TrainingPair {
    pub goal: u32,
    pub premise: u32,
}

/// What the encoder learns from.
#[derive(Clone, Debug, Default)]
pub struct TrainingData {
    /// Goal statements' tokens (theorems whose proofs are known).
    pub goals: Vec<Vec<String>>,
    /// Premise statements' tokens; the idf is counted over these.
    pub premises: Vec<Vec<String>>,
    /// Which goal uses which premise.
    pub pairs: Vec<TrainingPair>,
    /// Empty, or one list of premise indices per pair: negatives the caller picked. A
    /// premise the pair's goal uses is never treated as a negative.
    pub hard_negatives: Vec<Vec<u32>>,
}

/// Held-out goals to measure recall@k on while training, against all premises.
#[derive(Clone, Debug, Default)]
pub struct Validation {
    /// Goal statements' tokens.
    pub goals: Vec<Vec<String>>,
    /// Goal index (into `goals`) and premise index (into the training premises).
    pub pairs: Vec<TrainingPair>,
    /// The k of recall@k.
    pub k: usize,
}

/// Training settings.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TrainConfig {
    /// The encoder's shape and the seed of its initial rows.
    pub encoder: EncoderSettings,
    /// Passes over the pairs. Default 5.
    pub epochs: usize,
    /// Pairs per batch (each is every other pair's in-batch negative). Default 64.
    pub batch_size: usize,
    /// Adagrad's learning rate. Default 0.05 (rows start at length about 1).
    pub learning_rate: f64,
    /// InfoNCE temperature τ. Default 0.05.
    pub temperature: f64,
    /// Seed of the example order. Default 1.
    pub seed: u64,
    /// At most this many pairs per epoch: each epoch trains on the first ones of its own
    /// shuffled order, so over the epochs different samples are seen. `None` (the
    /// default): every pair every epoch.
    pub pairs_per_epoch: Option<usize>,
}

impl Default for TrainConfig {
    fn default() -> Self {
        TrainConfig {
            encoder: EncoderSettings::default(),
            epochs: 5,
            batch_size: 64,
            learning_rate: 0.05,
            temperature: 0.05,
            seed: 1,
            pairs_per_epoch: None,
        }
    }
}

/// One epoch's figures.
#[derive(Clone, Debug, PartialEq)]
pub struct EpochReport {
    /// 1-based.
    pub epoch: usize,
    /// Mean InfoNCE loss over the epoch's pairs, measured before each batch's update.
    pub mean_loss: f64,
    /// Recall@k on the validation set after the epoch, when one was given.
    pub validation_recall: Option<f64>,
    /// Wall-clock seconds the epoch took (not part of the deterministic result).
    pub seconds: f64,
}

/// What training did.
#[derive(Clone, Debug, PartialEq)]
pub struct TrainReport {
    /// Recall@k on the validation set before training, when one was given.
    pub initial_validation_recall: Option<f64>,
    /// One entry per epoch.
    pub epochs: Vec<EpochReport>,
}

fn bad(message: String) -> DenseError {
    DenseError::TrainingData(message)
}

fn check_config(config: &TrainConfig) -> Result<(), DenseError> {
    config.encoder.validate()?;
    let setting = |field, message: String| Err(DenseError::InvalidSetting { field, message });
    if config.batch_size == 0 {
        return setting("batch_size", "must be at least 1".into());
    }
    if config.pairs_per_epoch == Some(0) {
        return setting("pairs_per_epoch", "must be at least 1".into());
    }
    if !(config.learning_rate.is_finite() && config.learning_rate > 0.0) {
        return setting(
            "learning_rate",
            format!("{} is not a positive number", config.learning_rate),
        );
    }
    if !(config.temperature.is_finite() && config.temperature > 0.0) {
        return setting(
            "temperature",
            format!("{} is not a positive number", config.temperature),
        );
    }
    Ok(())
}

fn check_pairs(
    pairs: &[TrainingPair],
    goals: usize,
    premises: usize,
    what: &str,
) -> Result<(), DenseError> {
    for (i, p) in pairs.iter().enumerate() {
        if p.goal as usize >= goals {
            return Err(bad(format!(
                "{what} pair {i} names goal {}, there are {goals}",
                p.goal
            )));
        }
        if p.premise as usize >= premises {
            return Err(bad(format!(
                "{what} pair {i} names premise {}, there are {premises}",
                p.premise
            )));
        }
    }
    Ok(())
}

fn check_data(data: &TrainingData) -> Result<(), DenseError> {
    let np = data.premises.len();
    check_pairs(&data.pairs, data.goals.len(), np, "training")?;
    if !data.hard_negatives.is_empty() && data.hard_negatives.len() != data.pairs.len() {
        return Err(bad(format!(
            "{} hard-negative lists for {} pairs (give none, or one per pair)",
            data.hard_negatives.len(),
            data.pairs.len()
        )));
    }
    for (i, negs) in data.hard_negatives.iter().enumerate() {
        if let Some(&n) = negs.iter().find(|&&n| n as usize >= np) {
            return Err(bad(format!(
                "hard negatives of pair {i} name premise {n}, there are {np}"
            )));
        }
    }
    Ok(())
}

/// Recall@k of `validation`: the share of its pairs whose premise is among the goal's `k`
/// nearest premises by the encoder's vectors (exact scan).
pub fn validation_recall(
    encoder: &LearnedEncoder,
    premises: &[Vec<String>],
    validation: &Validation,
) -> Result<f64, DenseError> {
    check_pairs(
        &validation.pairs,
        validation.goals.len(),
        premises.len(),
        "validation",
    )?;
    if validation.pairs.is_empty() {
        return Ok(0.0);
    }
    let rows: Vec<Vec<f32>> = premises
        .par_iter()
        .map(|p| encoder.encode_premise_tokens(p))
        .collect();
    let index = ExactIndex::new(VectorSet::from_rows(
        encoder.settings().dim as usize,
        &rows,
    )?);
    let top: Vec<Vec<u32>> = validation
        .goals
        .par_iter()
        .map(|g| {
            let q = encoder.encode_goal_tokens(g);
            index
                .search(&q, validation.k)
                .into_iter()
                .map(|h| h.0)
                .collect()
        })
        .collect();
    let hits = validation
        .pairs
        .iter()
        .filter(|p| {
            top.get(p.goal as usize)
                .is_some_and(|t| t.contains(&p.premise))
        })
        .count();
    Ok(hits as f64 / validation.pairs.len() as f64)
}

/// Row-wise Adagrad state: one squared-gradient accumulator per row and side.
struct RowAdagrad {
    goal: Vec<f64>,
    premise: Vec<f64>,
    learning_rate: f64,
}

impl RowAdagrad {
    fn apply(&mut self, encoder: &mut LearnedEncoder, side: Side, rows: &[(u32, Vec<f64>)]) {
        let (acc, table) = match side {
            Side::Goal => (&mut self.goal, &mut encoder.goal_table),
            Side::Premise => (&mut self.premise, &mut encoder.premise_table),
        };
        for (row, g) in rows {
            let (Some(a), Some(values)) = (
                acc.get_mut(*row as usize),
                row_slice_mut(table, *row as usize),
            ) else {
                continue;
            };
            *a += g.iter().map(|x| x * x).sum::<f64>() / g.len().max(1) as f64;
            let step = self.learning_rate / (a.sqrt() + 1e-10);
            for (v, gi) in values.iter_mut().zip(g) {
                *v = (f64::from(*v) - step * gi) as f32;
            }
        }
    }
}

/// Trains an encoder on `data` with `config`; see the module documentation.
pub fn train(
    data: &TrainingData,
    config: &TrainConfig,
    validation: Option<&Validation>,
) -> Result<(LearnedEncoder, TrainReport), DenseError> {
    check_config(config)?;
    check_data(data)?;
    let mut encoder = LearnedEncoder::initial(config.encoder, &data.premises)?;
    let premise_bags: Vec<FeatureBag> = data
        .premises
        .par_iter()
        .map(|p| encoder.features(p))
        .collect();
    let goal_bags: Vec<FeatureBag> = data.goals.par_iter().map(|g| encoder.features(g)).collect();
    let positives: HashSet<(u32, u32)> = data.pairs.iter().map(|p| (p.goal, p.premise)).collect();
    let buckets = config.encoder.buckets as usize;
    let mut optimiser = RowAdagrad {
        goal: vec![0.0; buckets],
        premise: vec![0.0; buckets],
        learning_rate: config.learning_rate,
    };
    let recall = |enc: &LearnedEncoder| {
        validation
            .map(|v| validation_recall(enc, &data.premises, v))
            .transpose()
    };
    let mut report = TrainReport {
        initial_validation_recall: recall(&encoder)?,
        epochs: Vec::new(),
    };
    let no_negatives: &[u32] = &[];
    let mut order: Vec<usize> = (0..data.pairs.len()).collect();
    for epoch in 1..=config.epochs {
        let started = Instant::now();
        order.sort_unstable();
        SplitMix64::new(config.seed)
            .fork(epoch as u64)
            .shuffle(&mut order);
        let mut loss_sum = 0.0;
        let seen = config
            .pairs_per_epoch
            .map_or(order.len(), |n| n.min(order.len()));
        for chunk in order[..seen].chunks(config.batch_size) {
            let batch: Vec<Example<'_>> = chunk
                .iter()
                .filter_map(|&i| {
                    let pair = data.pairs.get(i)?;
                    Some(Example {
                        goal_id: pair.goal,
                        goal: goal_bags.get(pair.goal as usize)?,
                        positive: pair.premise,
                        hard_negatives: data
                            .hard_negatives
                            .get(i)
                            .map_or(no_negatives, Vec::as_slice),
                    })
                })
                .collect();
            let grad = batch_gradient(
                &encoder,
                &premise_bags,
                &batch,
                config.temperature,
                &positives,
            );
            loss_sum += grad.loss_sum;
            optimiser.apply(&mut encoder, Side::Goal, &grad.goal_rows);
            optimiser.apply(&mut encoder, Side::Premise, &grad.premise_rows);
        }
        report.epochs.push(EpochReport {
            epoch,
            mean_loss: loss_sum / seen.max(1) as f64,
            validation_recall: recall(&encoder)?,
            seconds: started.elapsed().as_secs_f64(),
        });
    }
    Ok((encoder, report))
}

#[cfg(test)]
#[path = "train_tests.rs"]
mod tests;
