//! Held-out splits of a library's theorems, for honest evaluation.
//!
//! Takes the library model, a split kind, a held-out fraction and a seed; gives the test
//! theorems (queries), the validation theorems (for tuning, never the test part) and the
//! training theorems (whose proofs learned signals may use). Deterministic for a seed.
//!
//! - `random`: a fraction of the eligible theorems;
//! - `file`: whole files held out, to measure generalisation to new files;
//! - `novel`: held-out theorems whose proofs use at least one premise no training proof
//!   uses (the premises-never-seen protocol).

use std::collections::HashSet;

use serde::{Deserialize, Serialize};

use crate::dense::seeded::SplitMix64;
use crate::library::{DeclId, DeclKind, FileId, Library, ProofEnding};
use crate::retrieve::DEFAULT_KINDS;

/// How theorems are held out.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SplitKind {
    Random,
    File,
    Novel,
}

impl SplitKind {
    /// Parses `random`, `file` or `novel`.
    pub fn parse(text: &str) -> Option<SplitKind> {
        match text {
            "random" => Some(SplitKind::Random),
            "file" => Some(SplitKind::File),
            "novel" => Some(SplitKind::Novel),
            _ => None,
        }
    }

    /// The name used on the command line and in reports.
    pub fn as_str(self) -> &'static str {
        match self {
            SplitKind::Random => "random",
            SplitKind::File => "file",
            SplitKind::Novel => "novel",
        }
    }
}

/// The parameters of a split.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct SplitConfig {
    pub kind: SplitKind,
    /// Fraction of eligible theorems held out for testing (0 < holdout < 1).
    pub holdout: f64,
    /// Fraction of the remaining theorems set aside for validation (tuning).
    pub validation: f64,
    pub seed: u64,
}

impl Default for SplitConfig {
    fn default() -> SplitConfig {
        SplitConfig {
            kind: SplitKind::Random,
            holdout: 0.1,
            validation: 0.1,
            seed: 42,
        }
    }
}

/// A split of the eligible theorems.
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct Split {
    /// Held-out theorems: the queries.
    pub test: Vec<DeclId>,
    /// Theorems for tuning weights and boosts; never in `test`.
    pub validation: Vec<DeclId>,
    /// Theorems whose proofs learned signals may learn from (neither test nor validation).
    pub train: Vec<DeclId>,
    /// Held out but not queried (the `novel` split drops held-out theorems whose premises
    /// all appear in training proofs); their proofs are not learned from either.
    pub excluded: Vec<DeclId>,
}

impl Split {
    /// Whether the proof of `id` may be learned from.
    pub fn is_training(&self, id: DeclId) -> bool {
        self.train.binary_search(&id).is_ok()
    }
}

/// Why a split cannot be made.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SplitError {
    #[error("--holdout {0} is not a fraction between 0 and 1 (exclusive)")]
    Holdout(f64),
    #[error("validation fraction {0} is not between 0 and 1 (exclusive)")]
    Validation(f64),
    #[error(
        "the library has no theorem whose proof uses a premise of the library: nothing to evaluate"
    )]
    NothingEligible,
}

/// Theorems that can be queries: theorems with a proof that uses at least one premise of
/// a kind that can answer (see [`answer_premises`](super::queries::answer_premises)).
pub fn eligible_theorems(library: &Library) -> Vec<DeclId> {
    library
        .declarations
        .iter()
        .filter(|d| {
            d.kind == DeclKind::Theorem
                && d.proof_ending != Some(ProofEnding::Admitted)
                && library
                    .graph
                    .premises(d.id)
                    .any(|p| DEFAULT_KINDS.contains(&library.declaration(p).kind))
        })
        .map(|d| d.id)
        .collect()
}

/// Splits the eligible theorems of `library` as `config` says.
pub fn split(library: &Library, config: &SplitConfig) -> Result<Split, SplitError> {
    if !(config.holdout > 0.0 && config.holdout < 1.0) {
        return Err(SplitError::Holdout(config.holdout));
    }
    if !(config.validation > 0.0 && config.validation < 1.0) {
        return Err(SplitError::Validation(config.validation));
    }
    let eligible = eligible_theorems(library);
    if eligible.is_empty() {
        return Err(SplitError::NothingEligible);
    }
    let rng = SplitMix64::new(config.seed);
    let target = ((eligible.len() as f64 * config.holdout).round() as usize).max(1);
    let (held, rest): (Vec<DeclId>, Vec<DeclId>) = match config.kind {
        SplitKind::Random | SplitKind::Novel => {
            let mut order = eligible.clone();
            rng.fork(1).shuffle(&mut order);
            let held: Vec<DeclId> = order[..target.min(order.len())].to_vec();
            let rest = order[target.min(order.len())..].to_vec();
            (held, rest)
        }
        SplitKind::File => {
            let mut files: Vec<FileId> = eligible
                .iter()
                .map(|&d| library.declaration(d).file)
                .collect::<HashSet<_>>()
                .into_iter()
                .collect();
            files.sort();
            rng.fork(2).shuffle(&mut files);
            let mut chosen = HashSet::new();
            let mut count = 0;
            for f in files {
                if count >= target {
                    break;
                }
                count += eligible
                    .iter()
                    .filter(|&&d| library.declaration(d).file == f)
                    .count();
                chosen.insert(f);
            }
            eligible
                .iter()
                .partition(|&&d| chosen.contains(&library.declaration(d).file))
        }
    };
    let mut rest = rest;
    rest.sort();
    rng.fork(3).shuffle(&mut rest);
    let n_val = ((rest.len() as f64 * config.validation).round() as usize).min(rest.len());
    let mut validation = rest[..n_val].to_vec();
    let mut train = rest[n_val..].to_vec();
    let mut test = held;
    let mut excluded = Vec::new();
    if config.kind == SplitKind::Novel {
        let seen: HashSet<DeclId> = train
            .iter()
            .flat_map(|&t| library.graph.premises(t))
            .collect();
        let (novel, not_novel): (Vec<DeclId>, Vec<DeclId>) = test
            .into_iter()
            .partition(|&t| library.graph.premises(t).any(|p| !seen.contains(&p)));
        test = novel;
        excluded = not_novel;
    }
    test.sort();
    validation.sort();
    train.sort();
    excluded.sort();
    Ok(Split {
        test,
        validation,
        train,
        excluded,
    })
}
