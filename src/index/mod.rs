//! The index: the parts built from the library model that retrieval reads, and the opened
//! index that serves queries.
//!
//! Takes a [`Library`] and a [`BuildConfig`] (which theorems' proofs may be learned from,
//! whether to train the dense encoder, how to choose the fusion weights); gives, inside a
//! generation folder, the library model, the lexical index (tantivy), the dense part
//! (encoder and vectors), the votable theorems of the neighbour signal and the fusion
//! weights, and opens them again as an [`OpenIndex`] — the one value the command line, the
//! server and evaluation query. It reads no source files; it ranks only through the tuner
//! its caller hands it.

pub mod dense;
pub mod lexical;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::Instant;

use crate::dense::seeded::SplitMix64;
use crate::dense::DenseError;
use crate::library::store::{self, Generation, GenerationWriter, Manifest, StoreError};
use crate::library::{DeclId, DeclKind, Library, NotationInfo, ProofEnding};
use crate::retrieve::accessible::{accessible_premises, PremiseFilter};
use crate::retrieve::fusion::{FusionTuning, FusionWeights};
use crate::retrieve::neighbours::{PremiseUsage, VoteParams};
use crate::tokens::Tokenizer;
use dense::{DenseBuildError, DenseMode, DensePart};
use lexical::{LexicalError, LexicalIndex, TokenizeFn, LEXICAL_PART};

/// Why an index could not be built or opened.
#[derive(Debug, thiserror::Error)]
pub enum IndexError {
    #[error(transparent)]
    Store(#[from] StoreError),
    #[error(transparent)]
    Lexical(#[from] LexicalError),
    #[error(transparent)]
    DenseBuild(#[from] DenseBuildError),
    #[error("dense part of the index: {0}")]
    Dense(#[from] DenseError),
    #[error("index part `{part}`: {message}")]
    Part { part: &'static str, message: String },
    #[error("choosing the fusion weights: {0}")]
    Tuning(String),
}

/// The part listing the theorems whose proofs vote in the neighbour signal.
pub const VOTABLE_PART: &str = "neighbours/votable.bin";

/// Chooses fusion weights on an index being built, given the validation theorems (it runs
/// the signals, so it lives with the caller: evaluation has the queries and metrics).
pub type FusionTuner<'t> =
    dyn Fn(&OpenIndex, &[DeclId]) -> Result<FusionTuning, String> + Sync + 't;

/// How the fusion weights of a build are chosen.
#[derive(Clone, Copy, Default)]
pub enum FusionChoice<'a> {
    /// Every signal weighs 1.
    #[default]
    Equal,
    /// These weights.
    Fixed(&'a FusionWeights),
    /// By this tuner, on the validation theorems.
    Tuned(&'a FusionTuner<'a>),
}

/// What a build learns from and how.
#[derive(Clone)]
pub struct BuildConfig<'a> {
    pub dense: DenseMode,
    /// The theorems whose proofs may be learned from (dense training, neighbour votes,
    /// fusion tuning); `None`: every theorem of the library.
    pub training: Option<&'a [DeclId]>,
    /// The theorems the fusion is tuned and the encoder validated on, never learned from;
    /// `None`: a seeded [`VALIDATION_SHARE`] of the eligible training theorems, taken out
    /// of the training part.
    pub validation: Option<&'a [DeclId]>,
    pub fusion: FusionChoice<'a>,
    /// Goal states harvested from the library's proofs: the learned encoder learns from
    /// those of training theorems beside the statements (the others are ignored).
    pub states: &'a [dense::TrainingState],
    /// Seed of the validation split and of the encoder.
    pub seed: u64,
}

impl Default for BuildConfig<'_> {
    fn default() -> Self {
        BuildConfig {
            dense: DenseMode::Learned,
            training: None,
            validation: None,
            fusion: FusionChoice::Equal,
            states: &[],
            seed: 1,
        }
    }
}

/// The share of eligible theorems a build holds out for validation when not told which.
pub const VALIDATION_SHARE: f64 = 0.1;

/// Theorems with a finished proof that uses a premise of the library.
fn provable_theorems(library: &Library) -> Vec<DeclId> {
    library
        .declarations
        .iter()
        .filter(|d| {
            d.kind == DeclKind::Theorem
                && d.proof_ending != Some(ProofEnding::Admitted)
                && library.graph.proof_uses.degree(d.id) > 0
        })
        .map(|d| d.id)
        .collect()
}

/// The (training, validation) theorems of a build, each sorted.
fn learning_sets(library: &Library, config: &BuildConfig<'_>) -> (Vec<DeclId>, Vec<DeclId>) {
    let mut training: Vec<DeclId> = match config.training {
        Some(t) => t
            .iter()
            .copied()
            .filter(|&d| (d.0 as usize) < library.declarations.len())
            .filter(|&d| library.graph.proof_uses.degree(d) > 0)
            .collect(),
        None => provable_theorems(library),
    };
    training.sort();
    training.dedup();
    let mut validation: Vec<DeclId> = match config.validation {
        Some(v) => v.to_vec(),
        None => {
            let mut order = training.clone();
            SplitMix64::new(config.seed).fork(7).shuffle(&mut order);
            let n = (order.len() as f64 * VALIDATION_SHARE).round() as usize;
            order.truncate(n);
            order
        }
    };
    validation.sort();
    validation.dedup();
    training.retain(|d| validation.binary_search(d).is_err());
    (training, validation)
}

/// The most words one library-defined symbol teaches.
const WORDS_PER_LEARNED_SYMBOL: usize = 1;

/// The shared tokenizer of a library: the built-in operator table extended by the
/// library's own notation declarations.
///
/// A symbol the built-in table already knows keeps its words: a large library declares
/// `+` once per number system (`Qplus`, `Rplus`, `Zplus`, ...), and teaching all of them
/// would turn every `+` of every goal into a dozen query terms. A symbol the built-in table
/// does not know (`⊕`, `+++`) learns the name most of its notations unfold to (ties: the
/// first in name order), so the result does not depend on declaration order.
pub fn library_tokenizer(library: &Library) -> Tokenizer {
    use crate::tokens::TokenKind;
    let standard = Tokenizer::standard();
    let mut targets: BTreeMap<&str, BTreeMap<&str, usize>> = BTreeMap::new();
    for n in library
        .declarations
        .iter()
        .filter_map(|d| d.notation.as_ref())
    {
        let Some(target) = n.unfolds_to.as_deref().or(n.unfolds_to_written.as_deref()) else {
            continue;
        };
        for sym in &n.symbols {
            let known = standard
                .tokenize(sym)
                .iter()
                .any(|t| t.kind == TokenKind::SymbolWord);
            if !known {
                *targets.entry(sym).or_default().entry(target).or_default() += 1;
            }
        }
    }
    let learned: Vec<NotationInfo> = targets
        .into_iter()
        .flat_map(|(sym, counts)| {
            let mut ranked: Vec<(&str, usize)> = counts.into_iter().collect();
            ranked.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(b.0)));
            ranked
                .into_iter()
                .take(WORDS_PER_LEARNED_SYMBOL)
                .map(move |(target, _)| NotationInfo {
                    symbols: vec![sym.to_string()],
                    unfolds_to: Some(target.to_string()),
                    unfolds_to_written: Some(target.to_string()),
                })
        })
        .collect();
    Tokenizer::with_notations(learned.iter())
}

/// The tokenizer as the lexical index calls it: every token's text.
pub fn tokenize_fn(tokenizer: Arc<Tokenizer>) -> TokenizeFn {
    Arc::new(move |text: &str, out: &mut Vec<String>| {
        out.extend(tokenizer.tokenize(text).texts().map(str::to_string));
    })
}

/// Time spent on each stage of a build, in seconds.
#[derive(Clone, Debug, Default, serde::Serialize)]
pub struct BuildTimings {
    pub lexical_seconds: f64,
    /// Training the encoder and encoding every declaration (0 without the dense part).
    pub dense_seconds: f64,
    /// Choosing the fusion weights (0 unless tuned).
    pub tuning_seconds: f64,
    pub write_seconds: f64,
}

/// Writes a new generation of `index_dir` holding `library` and every index part with the
/// default [`BuildConfig`] (learned dense part, every theorem learned from but a held-out
/// validation share, equal fusion weights), and makes it live.
pub fn build_index(
    index_dir: &Path,
    library: &Library,
    settings: BTreeMap<String, serde_json::Value>,
) -> Result<(PathBuf, BuildTimings), IndexError> {
    build_index_with(index_dir, library, settings, &BuildConfig::default())
}

/// Writes a new generation of `index_dir` holding `library` and every index part as
/// `config` says, and makes it live. `settings` are recorded in the manifest, with the
/// dense training figures (`dense`), the learning sets' sizes (`training`) and the fusion
/// weights (`fusion`) added.
pub fn build_index_with(
    index_dir: &Path,
    library: &Library,
    mut settings: BTreeMap<String, serde_json::Value>,
    config: &BuildConfig<'_>,
) -> Result<(PathBuf, BuildTimings), IndexError> {
    let inputs: String = library
        .files
        .iter()
        .map(|f| f.content_hash.as_str())
        .collect();
    let mut writer = GenerationWriter::create(index_dir, &inputs)?;
    let mut timings = BuildTimings::default();
    let started = Instant::now();
    let tokenizer = Arc::new(library_tokenizer(library));
    let lexical_dir = writer.staging_dir().join(LEXICAL_PART);
    lexical::build(library, tokenize_fn(tokenizer.clone()), &lexical_dir)?;
    writer.record_folder(LEXICAL_PART)?;
    let lexical = LexicalIndex::open(
        &lexical_dir,
        tokenize_fn(tokenizer.clone()),
        library.declarations.len(),
    )?;
    timings.lexical_seconds = started.elapsed().as_secs_f64();

    let (training, validation) = learning_sets(library, config);
    settings.insert(
        "training".to_string(),
        serde_json::json!({
            "learned_from": if config.training.is_some() { "given theorems" } else { "all theorems" },
            "training_theorems": training.len(),
            "validation_theorems": validation.len(),
            "seed": config.seed,
        }),
    );
    let started = Instant::now();
    let (dense, dense_summary) = dense::build_dense_part(
        &config.dense,
        library,
        &tokenizer,
        &lexical,
        &training,
        config.states,
        &validation,
        config.seed,
        index_dir,
        &mut writer,
    )?;
    settings.insert("dense".to_string(), dense_summary);
    timings.dense_seconds = started.elapsed().as_secs_f64();
    let votable: Vec<u32> = training.iter().map(|d| d.0).collect();
    let votable_bytes = postcard::to_stdvec(&votable).map_err(|e| IndexError::Part {
        part: VOTABLE_PART,
        message: format!("cannot encode: {e}"),
    })?;
    writer.write_part(VOTABLE_PART, &votable_bytes)?;

    let started = Instant::now();
    let fusion = match config.fusion {
        FusionChoice::Equal => {
            serde_json::json!({ "weights": FusionWeights::default(), "chosen": "equal" })
        }
        FusionChoice::Fixed(w) => serde_json::json!({ "weights": w, "chosen": "given" }),
        FusionChoice::Tuned(tuner) => {
            let provisional = Generation {
                dir: writer.staging_dir().to_path_buf(),
                manifest: Manifest {
                    format: store::FORMAT_NAME.to_string(),
                    format_version: store::FORMAT_VERSION,
                    quarry_version: env!("CARGO_PKG_VERSION").to_string(),
                    build_id: writer.build_id().to_string(),
                    created: String::new(),
                    settings: settings.clone(),
                    files: Vec::new(),
                    counts: store::Counts::of(library),
                    parts: BTreeMap::new(),
                },
            };
            let open = OpenIndex::assemble(
                index_dir,
                provisional,
                library.clone(),
                tokenizer.clone(),
                lexical,
                dense,
                training.clone(),
                FusionWeights::default(),
            );
            let tuning = tuner(&open, &validation).map_err(IndexError::Tuning)?;
            serde_json::json!({ "weights": tuning.weights, "chosen": "tuned", "tuning": tuning })
        }
    };
    settings.insert("fusion".to_string(), fusion);
    timings.tuning_seconds = started.elapsed().as_secs_f64();
    let started = Instant::now();
    writer.write_library(library)?;
    let gen = writer.commit(library, settings)?;
    timings.write_seconds = started.elapsed().as_secs_f64();
    Ok((gen, timings))
}

/// An index opened for queries: the library model, its tokenizer and every signal's data.
pub struct OpenIndex {
    /// The index folder as given.
    pub dir: PathBuf,
    pub generation: Generation,
    pub library: Library,
    pub tokenizer: Arc<Tokenizer>,
    pub lexical: LexicalIndex,
    /// The declarations of the default kinds: the candidates of a request that names no
    /// place and no kinds.
    pub default_candidates: Arc<PremiseFilter>,
    /// Field boosts of the lexical query (evaluation's tuning changes them between runs).
    pub lexical_boosts: lexical::FieldBoosts,
    /// The learned encoder and every declaration's vector, unless built with `--dense off`.
    pub dense: Option<DensePart>,
    /// The theorems whose proofs vote in the neighbour signal (sorted): the build's
    /// training part, never a held-out theorem.
    pub votable: Vec<DeclId>,
    /// The same set as a filter, so a query finds its voters with one AND of two bitsets.
    pub votable_filter: PremiseFilter,
    /// How often each premise is used by a votable proof.
    pub usage: PremiseUsage,
    /// Parameters of the neighbour vote.
    pub vote_params: VoteParams,
    /// The weights of the fusion of all signals.
    pub fusion: FusionWeights,
}

impl OpenIndex {
    /// Opens the live generation of `index_dir`, checking every part it reads.
    pub fn open(index_dir: &Path) -> Result<OpenIndex, IndexError> {
        let generation = store::open_generation(index_dir)?;
        let library = generation.load_library()?;
        generation.verify_folder(LEXICAL_PART)?;
        let tokenizer = Arc::new(library_tokenizer(&library));
        let lexical = LexicalIndex::open(
            &generation.dir.join(LEXICAL_PART),
            tokenize_fn(tokenizer.clone()),
            library.declarations.len(),
        )?;
        // Computed now, so the first query does not wait for it.
        lexical.prepare(&lexical::FieldBoosts::default())?;
        let dense = DensePart::load(&generation, library.declarations.len())?;
        let votable = if generation.manifest.parts.contains_key(VOTABLE_PART) {
            let bytes = generation.read_part(VOTABLE_PART)?;
            let ids: Vec<u32> = postcard::from_bytes(&bytes).map_err(|e| IndexError::Part {
                part: VOTABLE_PART,
                message: format!("not a list of declaration ids: {e}"),
            })?;
            if let Some(bad) = ids
                .iter()
                .find(|&&i| i as usize >= library.declarations.len())
            {
                return Err(IndexError::Part {
                    part: VOTABLE_PART,
                    message: format!(
                        "names declaration {bad}, the library has {}",
                        library.declarations.len()
                    ),
                });
            }
            ids.into_iter().map(DeclId).collect()
        } else {
            Vec::new()
        };
        let fusion = generation
            .manifest
            .settings
            .get("fusion")
            .and_then(|f| f.get("weights"))
            .and_then(|w| serde_json::from_value(w.clone()).ok())
            .unwrap_or_default();
        Ok(OpenIndex::assemble(
            index_dir, generation, library, tokenizer, lexical, dense, votable, fusion,
        ))
    }

    /// An index from parts already in memory (the build tunes the fusion on one).
    #[allow(clippy::too_many_arguments)]
    pub fn assemble(
        index_dir: &Path,
        generation: Generation,
        library: Library,
        tokenizer: Arc<Tokenizer>,
        lexical: LexicalIndex,
        dense: Option<DensePart>,
        mut votable: Vec<DeclId>,
        fusion: FusionWeights,
    ) -> OpenIndex {
        votable.sort();
        votable.dedup();
        let default_candidates = Arc::new(accessible_premises(
            &library,
            None,
            Some(&crate::retrieve::DEFAULT_KINDS),
        ));
        let usage = PremiseUsage::count(&library.graph, library.declarations.len(), &votable);
        let mut votable_filter = PremiseFilter::none(library.declarations.len());
        for &t in &votable {
            votable_filter.insert(t);
        }
        OpenIndex {
            dir: index_dir.to_path_buf(),
            generation,
            library,
            tokenizer,
            lexical,
            default_candidates,
            lexical_boosts: lexical::FieldBoosts::default(),
            dense,
            votable,
            votable_filter,
            usage,
            vote_params: VoteParams::default(),
            fusion,
        }
    }

    /// Whether `id`'s proof votes in the neighbour signal.
    pub fn is_votable(&self, id: DeclId) -> bool {
        self.votable.binary_search(&id).is_ok()
    }

    /// The build id of the generation being served.
    pub fn build_id(&self) -> &str {
        &self.generation.manifest.build_id
    }

    /// When the generation was built (RFC 3339).
    pub fn created(&self) -> &str {
        &self.generation.manifest.created
    }
}
