//! The dense part of an index: an encoder — the learned one trained on the library's own
//! proofs, or a pretrained transformer ([`transformer`]) — and every declaration's vector in
//! a [`VectorIndex`].
//!
//! Takes the library, the shared tokenizer, the lexical index (for hard negatives: BM25's
//! near misses for a theorem's statement that its proof does not use), and the theorems
//! whose proofs may be learned from; gives a [`DensePart`] (row `i` of the vectors is
//! declaration `i`) with its figures for the manifest, and saves and loads it through a
//! generation. It never looks at a proof outside the training set and does not rank
//! anything.

pub mod transformer;

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::Instant;

use rayon::prelude::*;
use serde::Serialize;

use crate::dense::seeded::SplitMix64;
use crate::dense::transformer::TransformerEncoder;
use crate::dense::{
    load_encoder, save_encoder, train, DenseError, Encoder, EncoderSettings, IndexParams,
    LearnedEncoder, TrainConfig, TrainingData, TrainingPair, Validation, VectorIndex, VectorSet,
};
use crate::library::store::{Generation, GenerationWriter};
use crate::library::{DeclId, Library};
use crate::query::{parse_goal, GoalSelection, QueryTerm};
use crate::retrieve::accessible::PremiseFilter;
use crate::tokens::Tokenizer;

use super::lexical::{local_name, LexicalError, LexicalIndex};

/// Whether an index gets the dense signal, and from which encoder.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DenseMode {
    /// Train the learned hashed-feature encoder on the library's proofs.
    Learned,
    /// Embed every declaration with a pretrained sentence-embedding model.
    Transformer(TransformerChoice),
    /// No dense signal (and neighbours found by the lexical signal only).
    Off,
}

/// The transformer model a build embeds with.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, serde::Deserialize)]
pub struct TransformerChoice {
    /// The model folder (`config.json`, `model.safetensors`, `tokenizer.json`, pooling).
    pub model_dir: PathBuf,
    /// Texts per forward pass.
    pub batch_size: usize,
}

/// The encoder of a dense part.
#[derive(Debug)]
pub enum DenseEncoder {
    Learned(LearnedEncoder),
    Transformer(Box<TransformerEncoder>),
}

impl Encoder for DenseEncoder {
    fn dim(&self) -> usize {
        match self {
            DenseEncoder::Learned(e) => e.dim(),
            DenseEncoder::Transformer(e) => e.dim(),
        }
    }

    fn encode_goal(&self, tokens: &[&str]) -> Vec<f32> {
        match self {
            DenseEncoder::Learned(e) => e.encode_goal(tokens),
            DenseEncoder::Transformer(e) => e.encode_goal(tokens),
        }
    }

    fn encode_premise(&self, tokens: &[&str]) -> Vec<f32> {
        match self {
            DenseEncoder::Learned(e) => e.encode_premise(tokens),
            DenseEncoder::Transformer(e) => e.encode_premise(tokens),
        }
    }
}

/// BM25 hits looked at per training theorem when choosing hard negatives.
const NEGATIVE_POOL: usize = 8;
/// Hard negatives kept per training pair.
const NEGATIVES_PER_PAIR: usize = 3;
/// Goals whose hard negatives are mined (a seeded sample when there are more). The Coq
/// standard library with its goal states has about 42,000 training goals, all mined.
pub const MINED_GOALS: usize = 60_000;
/// Query terms of a mining query: the goal's most selective ones.
pub const MINING_TERMS: usize = 16;
/// The fork of the build seed that draws the mining sample.
const MINING_SAMPLE: u64 = 0x6d69_6e65;
/// Training pairs per epoch (a fresh seeded sample each epoch when there are more): keeps
/// training's cost flat past the size of a large library. The Coq standard library with
/// its goal states has fewer.
pub const PAIRS_PER_EPOCH: usize = 250_000;
/// Validation goals the trainer measures recall on (an exact scan per epoch each).
const VALIDATION_GOALS: usize = 300;

/// The encoder settings quarry builds with: smaller than the trainer's defaults, so the
/// Coq standard library trains in seconds on two cores (2^16 buckets of 64 dimensions is
/// 16 MiB per table).
pub fn build_encoder_settings(seed: u64) -> EncoderSettings {
    EncoderSettings {
        buckets: 1 << 16,
        dim: 64,
        seed,
    }
}

/// Above this many vectors the HNSW graph is built on rayon's threads: a sequential build
/// is reproducible (the same vectors give the same graph), a parallel one about as many
/// times faster as there are cores but dependent on thread timing. Below it, where tests
/// and libraries the size of the Coq standard library live, builds stay reproducible.
pub const PARALLEL_GRAPH_ABOVE: usize = 50_000;

/// The vector index settings a build uses for `n` vectors.
pub fn vector_params(n: usize) -> IndexParams {
    let mut params = IndexParams::default();
    params.hnsw.parallel_build = n > PARALLEL_GRAPH_ABOVE;
    params
}

/// The encoder and the declarations' vectors.
pub struct DensePart {
    pub encoder: DenseEncoder,
    /// Row `i` is declaration `i`'s premise-side vector.
    pub vectors: VectorIndex,
    /// The theorems whose proofs the encoder was trained on (sorted), kept so a check can
    /// prove no held-out proof was learned from.
    pub training_goals: Vec<DeclId>,
}

/// The part listing the theorems the encoder was trained on.
pub const TRAINING_GOALS_PART: &str = "dense/training_goals.bin";

/// What training did, for the manifest and `quarry inspect`.
#[derive(Clone, Debug, Default, PartialEq, Serialize, serde::Deserialize)]
pub struct DenseSummary {
    pub buckets: u32,
    pub dim: u32,
    pub goals: usize,
    pub pairs: usize,
    pub hard_negatives: usize,
    /// Mean InfoNCE loss of each epoch.
    pub epoch_loss: Vec<f64>,
    /// Recall@10 of the validation goals before training, then after each epoch.
    pub validation_recall: Vec<f64>,
    pub validation_goals: usize,
    /// `exact` or `hnsw`.
    pub vector_index: String,
    pub train_seconds: f64,
    pub encode_seconds: f64,
}

/// Why the dense part could not be built.
#[derive(Debug, thiserror::Error)]
pub enum DenseBuildError {
    #[error("dense part: {0}")]
    Dense(#[from] DenseError),
    #[error("dense part, choosing hard negatives: {0}")]
    Lexical(#[from] LexicalError),
}

/// Builds the dense part `mode` asks for, saves it into `writer`, and gives it with the
/// figures the manifest records under `dense` (`None` and `{"mode": "off"}` when off).
/// `index_dir` is the folder being rebuilt: a transformer build re-uses the embeddings of
/// its live generation.
#[allow(clippy::too_many_arguments)]
pub fn build_dense_part(
    mode: &DenseMode,
    library: &Library,
    tokenizer: &Arc<Tokenizer>,
    lexical: &LexicalIndex,
    training: &[DeclId],
    states: &[TrainingState],
    validation: &[DeclId],
    seed: u64,
    index_dir: &Path,
    writer: &mut GenerationWriter,
) -> Result<(Option<DensePart>, serde_json::Value), DenseBuildError> {
    match mode {
        DenseMode::Off => Ok((None, serde_json::json!({ "mode": "off" }))),
        DenseMode::Learned => {
            let (part, summary) = build_dense(
                library, tokenizer, lexical, training, states, validation, seed,
            )?;
            part.save(writer)?;
            let mut value = serde_json::to_value(&summary).unwrap_or_default();
            if let Some(map) = value.as_object_mut() {
                map.insert("mode".into(), serde_json::json!("learned"));
                map.insert(
                    "encoder".into(),
                    serde_json::json!("hashed features, InfoNCE"),
                );
            }
            Ok((Some(part), value))
        }
        DenseMode::Transformer(choice) => {
            let (part, summary) = transformer::build_transformer_dense(
                library, tokenizer, choice, index_dir, writer,
            )?;
            let mut value = serde_json::to_value(&summary).unwrap_or_default();
            if let Some(map) = value.as_object_mut() {
                map.insert("mode".into(), serde_json::json!("transformer"));
            }
            Ok((Some(part), value))
        }
    }
}

/// The query terms of a goal text read as a pasted goal is read, first goal only (empty
/// when it does not parse).
pub fn text_terms(tokenizer: &Tokenizer, text: &str) -> Vec<QueryTerm> {
    parse_goal(text)
        .map(|goal| goal.query_terms(tokenizer, GoalSelection::First))
        .unwrap_or_default()
}

/// The query terms of a theorem's statement read as a goal, as a pasted goal is read
/// (empty when it does not parse).
pub fn goal_terms(library: &Library, tokenizer: &Tokenizer, id: DeclId) -> Vec<QueryTerm> {
    text_terms(tokenizer, &library.declaration(id).statement)
}

/// The goal-side tokens of a theorem: the texts of [`goal_terms`].
pub fn goal_tokens(library: &Library, tokenizer: &Tokenizer, id: DeclId) -> Vec<String> {
    goal_terms(library, tokenizer, id)
        .into_iter()
        .map(|t| t.text)
        .collect()
}

/// The premise-side tokens of a declaration: its local name and statement, as the lexical
/// `text` field.
pub fn premise_tokens(library: &Library, tokenizer: &Tokenizer, id: DeclId) -> Vec<String> {
    let d = library.declaration(id);
    let mut out: Vec<String> = tokenizer
        .tokenize(local_name(library, id))
        .texts()
        .map(str::to_string)
        .collect();
    out.extend(tokenizer.tokenize(&d.statement).texts().map(str::to_string));
    out
}

/// A goal state a training proof passed through (harvested by `quarry harvest`), with the
/// premises its next tactic named: learned from beside the theorem statements.
#[derive(Clone, Debug, PartialEq)]
pub struct TrainingState {
    /// The theorem whose proof shows the state; the state is used only when it is a
    /// training theorem.
    pub theorem: DeclId,
    /// The goal display, read as a pasted goal is.
    pub goal: String,
    /// The declarations the tactic named.
    pub premises: Vec<DeclId>,
}

/// The training data: one goal per training theorem whose proof uses a premise, one pair
/// per premise used, and BM25 hard negatives; then one goal per goal state of a training
/// theorem, one pair per premise its tactic named. Only theorems in `training` (sorted)
/// appear.
///
/// Hard negatives are mined for at most [`MINED_GOALS`] goals (a sample seeded by `seed`
/// when there are more; the others learn from in-batch negatives only), each with a BM25
/// query of its [`MINING_TERMS`] most selective terms, on rayon's threads. Without these
/// bounds mining was one whole-goal query over the whole library per goal: quadratic in the
/// library, 90 % of a 100k-declaration build (docs/performance.md).
pub fn training_data(
    library: &Library,
    tokenizer: &Tokenizer,
    lexical: &LexicalIndex,
    training: &[DeclId],
    states: &[TrainingState],
    premises: Vec<Vec<String>>,
    seed: u64,
) -> Result<(TrainingData, Vec<DeclId>), LexicalError> {
    struct Goal {
        theorem: DeclId,
        terms: Vec<QueryTerm>,
        used: Vec<DeclId>,
    }
    let mut goals: Vec<Goal> = Vec::new();
    for &t in training {
        if library.graph.proof_uses.degree(t) == 0 {
            continue;
        }
        let terms = goal_terms(library, tokenizer, t);
        if terms.is_empty() {
            continue;
        }
        let mut used: Vec<DeclId> = library.graph.premises(t).collect();
        used.sort_unstable();
        used.dedup();
        goals.push(Goal {
            theorem: t,
            terms,
            used,
        });
    }
    for state in states {
        if training.binary_search(&state.theorem).is_err() || state.premises.is_empty() {
            continue;
        }
        let terms = text_terms(tokenizer, &state.goal);
        if terms.is_empty() {
            continue;
        }
        let mut used = state.premises.clone();
        used.sort_unstable();
        used.dedup();
        goals.push(Goal {
            theorem: state.theorem,
            terms,
            used,
        });
    }
    let mut mined = vec![goals.len() <= MINED_GOALS; goals.len()];
    if goals.len() > MINED_GOALS {
        let mut order: Vec<usize> = (0..goals.len()).collect();
        SplitMix64::new(seed)
            .fork(MINING_SAMPLE)
            .shuffle(&mut order);
        for &i in order.iter().take(MINED_GOALS) {
            mined[i] = true;
        }
    }
    let boosts = super::lexical::FieldBoosts::default();
    let negatives: Vec<Vec<u32>> = goals
        .par_iter()
        .zip(mined.par_iter())
        .map(|(g, &mine)| -> Result<Vec<u32>, LexicalError> {
            if !mine {
                return Ok(Vec::new());
            }
            let query = lexical.most_selective(&g.terms, MINING_TERMS)?;
            Ok(lexical
                .search(&query, &boosts, None, NEGATIVE_POOL)?
                .into_iter()
                .map(|h| h.0)
                .filter(|d| *d != g.theorem && g.used.binary_search(d).is_err())
                .take(NEGATIVES_PER_PAIR)
                .map(|d| d.0)
                .collect())
        })
        .collect::<Result<_, _>>()?;
    let mut data = TrainingData {
        premises,
        ..TrainingData::default()
    };
    let mut goal_ids = Vec::with_capacity(goals.len());
    for (g, negatives) in goals.into_iter().zip(negatives) {
        let goal = data.goals.len() as u32;
        data.goals
            .push(g.terms.iter().map(|t| t.text.clone()).collect());
        goal_ids.push(g.theorem);
        for p in g.used {
            data.pairs.push(TrainingPair { goal, premise: p.0 });
            data.hard_negatives.push(negatives.clone());
        }
    }
    goal_ids.sort_unstable();
    goal_ids.dedup();
    Ok((data, goal_ids))
}

/// Trains the encoder on the proofs of `training`, measures recall@10 on (up to 300 of)
/// `validation`, encodes every declaration and indexes the vectors.
pub fn build_dense(
    library: &Library,
    tokenizer: &Arc<Tokenizer>,
    lexical: &LexicalIndex,
    training: &[DeclId],
    states: &[TrainingState],
    validation: &[DeclId],
    seed: u64,
) -> Result<(DensePart, DenseSummary), DenseBuildError> {
    let started = Instant::now();
    let premises: Vec<Vec<String>> = library
        .declarations
        .iter()
        .map(|d| premise_tokens(library, tokenizer, d.id))
        .collect();
    let (data, goal_ids) = training_data(
        library, tokenizer, lexical, training, states, premises, seed,
    )?;
    let mut check = Validation {
        k: 10,
        ..Validation::default()
    };
    for &v in validation.iter().take(VALIDATION_GOALS) {
        let tokens = goal_tokens(library, tokenizer, v);
        if tokens.is_empty() || library.graph.proof_uses.degree(v) == 0 {
            continue;
        }
        let goal = check.goals.len() as u32;
        check.goals.push(tokens);
        for p in library.graph.premises(v) {
            check.pairs.push(TrainingPair { goal, premise: p.0 });
        }
    }
    let config = TrainConfig {
        encoder: build_encoder_settings(seed),
        seed,
        pairs_per_epoch: Some(PAIRS_PER_EPOCH),
        ..TrainConfig::default()
    };
    let (encoder, report) = train(&data, &config, (!check.pairs.is_empty()).then_some(&check))?;
    let train_seconds = started.elapsed().as_secs_f64();
    let started = Instant::now();
    let rows: Vec<Vec<f32>> = data
        .premises
        .par_iter()
        .map(|p| encoder.encode_premise_tokens(p))
        .collect();
    let vectors = VectorIndex::build(
        VectorSet::from_rows(config.encoder.dim as usize, &rows)?,
        &vector_params(rows.len()),
    )?;
    let mut validation_recall: Vec<f64> = report.initial_validation_recall.into_iter().collect();
    validation_recall.extend(report.epochs.iter().filter_map(|e| e.validation_recall));
    let summary = DenseSummary {
        buckets: config.encoder.buckets,
        dim: config.encoder.dim,
        goals: data.goals.len(),
        pairs: data.pairs.len(),
        hard_negatives: data.hard_negatives.iter().map(Vec::len).sum(),
        epoch_loss: report.epochs.iter().map(|e| e.mean_loss).collect(),
        validation_recall,
        validation_goals: check.goals.len(),
        vector_index: match vectors {
            VectorIndex::Exact(_) => "exact".into(),
            VectorIndex::Hnsw(_) => "hnsw".into(),
        },
        train_seconds,
        encode_seconds: started.elapsed().as_secs_f64(),
    };
    let mut training_goals = goal_ids;
    training_goals.sort();
    Ok((
        DensePart {
            encoder: DenseEncoder::Learned(encoder),
            vectors,
            training_goals,
        },
        summary,
    ))
}

impl DensePart {
    /// Writes the encoder and the vectors into the generation being built (a transformer's
    /// model files and cache keys are written by its build, which has them).
    pub fn save(&self, writer: &mut GenerationWriter) -> Result<(), DenseError> {
        if let DenseEncoder::Learned(encoder) = &self.encoder {
            save_encoder(writer, encoder)?;
        }
        let goals: Vec<u32> = self.training_goals.iter().map(|d| d.0).collect();
        let bytes = postcard::to_stdvec(&goals).map_err(|e| DenseError::Decode {
            what: "training goals",
            message: e.to_string(),
        })?;
        writer.write_part(TRAINING_GOALS_PART, &bytes)?;
        self.vectors.save(writer)
    }

    /// Reads the dense part of `generation`, or `None` when it was built without one.
    /// The vectors must be one per declaration (`declarations`).
    pub fn load(
        generation: &Generation,
        declarations: usize,
    ) -> Result<Option<DensePart>, DenseError> {
        let parts = &generation.manifest.parts;
        let encoder = if parts.contains_key(crate::dense::index::ENCODER_PART) {
            DenseEncoder::Learned(load_encoder(generation)?)
        } else if parts.contains_key(transformer::MODEL_PART) {
            DenseEncoder::Transformer(Box::new(transformer::load_transformer(generation)?))
        } else {
            return Ok(None);
        };
        let vectors = VectorIndex::load(generation)?;
        if vectors.vectors().len() != declarations {
            return Err(DenseError::BadVector {
                what: "dense vectors".into(),
                message: format!(
                    "{} vectors for {declarations} declarations",
                    vectors.vectors().len()
                ),
            });
        }
        let goals: Vec<u32> = postcard::from_bytes(&generation.read_part(TRAINING_GOALS_PART)?)
            .map_err(|e| DenseError::Decode {
                what: "training goals",
                message: e.to_string(),
            })?;
        let training_goals = goals.into_iter().map(DeclId).collect();
        Ok(Some(DensePart {
            encoder,
            vectors,
            training_goals,
        }))
    }

    /// The `n` declarations nearest to `goal` (already encoded) among those `allowed`
    /// admits, best first (see [`DensePart::search_allowed_many`]).
    pub fn search_allowed(
        &self,
        goal: &[f32],
        allowed: &PremiseFilter,
        n: usize,
    ) -> Vec<(DeclId, f32)> {
        self.search_allowed_many(goal, &[(allowed, n)])
            .pop()
            .unwrap_or_default()
    }

    /// For each `(filter, n)` of `wanted`, the `n` declarations nearest to `goal` among
    /// those the filter admits, best first, from one vector search shared by all.
    ///
    /// The first search fetches enough that, at each filter's share of the vectors, it
    /// should hold `n` admitted hits with a margin (a filter admitting half the library
    /// needs about twice as many); when it does not, the search goes deeper (four times)
    /// until every list is full or every vector has been seen.
    pub fn search_allowed_many(
        &self,
        goal: &[f32],
        wanted: &[(&PremiseFilter, usize)],
    ) -> Vec<Vec<(DeclId, f32)>> {
        let total = self.vectors.vectors().len();
        let mut out: Vec<Vec<(DeclId, f32)>> = vec![Vec::new(); wanted.len()];
        if total == 0 || goal.iter().all(|x| *x == 0.0) || wanted.iter().all(|w| w.1 == 0) {
            return out;
        }
        let first_fetch = |(filter, n): &(&PremiseFilter, usize)| -> usize {
            if *n == 0 {
                return 0;
            }
            let share = filter.count().max(1) as f64 / total as f64;
            ((*n as f64 / share) * 1.25).ceil() as usize + 8
        };
        let mut depth = wanted.iter().map(first_fetch).max().unwrap_or(0).min(total);
        loop {
            let hits = self.vectors.search(goal, depth);
            let mut full = true;
            for (list, (filter, n)) in out.iter_mut().zip(wanted) {
                *list = hits
                    .iter()
                    .map(|&(i, s)| (DeclId(i), s))
                    .filter(|(d, _)| filter.contains(*d))
                    .take(*n)
                    .collect();
                full &= list.len() >= *n;
            }
            if full || depth >= total {
                return out;
            }
            depth = (depth * 4).min(total);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dense::ExactIndex;

    fn unit(v: &[f32]) -> Vec<f32> {
        let n = v.iter().map(|x| x * x).sum::<f32>().sqrt();
        v.iter().map(|x| x / n).collect()
    }

    /// Five vectors around a circle; the goal points at 0. With 0 and 1 forbidden the
    /// answers are the next nearest allowed (exact cosine order, worked by hand:
    /// cos(0°)=1 > cos(30°) > cos(60°) > cos(90°)=0 > cos(120°)).
    #[test]
    fn dense_search_keeps_only_allowed_and_goes_deeper() {
        let angles = [0f32, 30.0, 60.0, 90.0, 120.0];
        let rows: Vec<Vec<f32>> = angles
            .iter()
            .map(|a| unit(&[a.to_radians().cos(), a.to_radians().sin()]))
            .collect();
        let part = DensePart {
            encoder: DenseEncoder::Learned(
                LearnedEncoder::initial(
                    EncoderSettings {
                        buckets: 8,
                        dim: 2,
                        seed: 1,
                    },
                    &[vec!["ledger".to_string()]],
                )
                .expect("tiny encoder"),
            ),
            vectors: VectorIndex::Exact(ExactIndex::new(
                VectorSet::from_rows(2, &rows).expect("rows"),
            )),
            training_goals: Vec::new(),
        };
        let mut allowed = PremiseFilter::all(5);
        allowed.remove(DeclId(0));
        allowed.remove(DeclId(1));
        let hits = part.search_allowed(&[1.0, 0.0], &allowed, 2);
        let ids: Vec<u32> = hits.iter().map(|h| h.0 .0).collect();
        assert_eq!(ids, vec![2, 3]);
        let mut only_last = PremiseFilter::none(5);
        only_last.insert(DeclId(4));
        let hits = part.search_allowed(&[1.0, 0.0], &only_last, 1);
        assert_eq!(
            hits.len(),
            1,
            "a search deeper than the first fetch finds it"
        );
        assert_eq!(hits[0].0, DeclId(4));
        // Two filters from one search give what two searches give.
        let both = part.search_allowed_many(&[1.0, 0.0], &[(&allowed, 2), (&only_last, 1)]);
        assert_eq!(
            both,
            vec![
                part.search_allowed(&[1.0, 0.0], &allowed, 2),
                part.search_allowed(&[1.0, 0.0], &only_last, 1)
            ]
        );
        assert!(part
            .search_allowed_many(&[1.0, 0.0], &[(&allowed, 0)])
            .iter()
            .all(Vec::is_empty));
    }
}
