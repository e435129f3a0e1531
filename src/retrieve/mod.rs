//! Retrieval: from a goal's text to ranked premises.
//!
//! Takes an [`OpenIndex`] and a [`RankRequest`]; gives a [`PremiseRanking`]: the goal as it
//! was understood, and the premises best first with the evidence of each signal. The
//! signals are BM25 ([`Signal::Lexical`]), the learned encoder's nearest premises
//! ([`Signal::Dense`]) and the votes of similar theorems' proofs ([`Signal::Neighbours`]);
//! several are combined by reciprocal rank fusion ([`fusion`]). The command line, the
//! server and evaluation all call [`rank`]; none of them ranks by itself. It never reads
//! source files and never writes anything.

pub mod accessible;
pub mod fusion;
pub mod neighbours;

use std::sync::Arc;
use std::time::{Duration, Instant};

use serde::{Deserialize, Serialize};

use crate::dense::Encoder;
use crate::index::lexical::LexicalError;
use crate::index::OpenIndex;
use crate::library::{DeclId, DeclKind};
use crate::query::{parse_goal, GoalError, GoalSelection, GoalState, QueryTerm};
use accessible::{accessible_premises, QueryPlace};
use fusion::reciprocal_rank_fusion;
use neighbours::neighbour_votes;

/// The most premises one request may ask for.
pub const MAX_LIMIT: usize = 200;
/// How many premises a request gets when it does not say.
pub const DEFAULT_LIMIT: usize = 20;
/// The kinds that answer when a request names none: every kind but notations, which are
/// syntax, not premises a proof can use (ask for `notation` explicitly to see them).
pub const DEFAULT_KINDS: [DeclKind; 8] = [
    DeclKind::Theorem,
    DeclKind::Definition,
    DeclKind::Instance,
    DeclKind::Structure,
    DeclKind::Inductive,
    DeclKind::Constructor,
    DeclKind::Field,
    DeclKind::Axiom,
];

/// A source of evidence for ranking premises.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Signal {
    /// BM25 over quarry's math-aware tokens (tantivy).
    Lexical,
    /// Cosine of the learned encoder's goal and premise vectors.
    Dense,
    /// Votes of the proofs of the theorems most similar to the goal.
    Neighbours,
}

impl Signal {
    /// Every signal this build of quarry has.
    pub const ALL: [Signal; 3] = [Signal::Lexical, Signal::Dense, Signal::Neighbours];

    /// The name used on the command line and in JSON.
    pub fn as_str(self) -> &'static str {
        match self {
            Signal::Lexical => "lexical",
            Signal::Dense => "dense",
            Signal::Neighbours => "neighbours",
        }
    }

    /// Parses a name given by [`Signal::as_str`].
    pub fn parse(text: &str) -> Option<Signal> {
        Signal::ALL.into_iter().find(|s| s.as_str() == text)
    }
}

/// One query for premises.
#[derive(Clone, Debug, PartialEq)]
pub struct RankRequest {
    /// The goal as pasted: an editor's goal display, a statement, or a declaration header.
    pub goal: String,
    /// How many premises to return, 1 to [`MAX_LIMIT`].
    pub limit: usize,
    /// Where the cursor is: only premises accessible there may answer.
    pub place: Option<QueryPlace>,
    /// Only premises of these kinds may answer ([`DEFAULT_KINDS`] when `None`).
    pub kinds: Option<Vec<DeclKind>>,
    /// Which signals to use (all when `None`).
    pub signals: Option<Vec<Signal>>,
    /// Rank for every goal of a multi-goal display, not just the first.
    pub all_goals: bool,
    /// Fill in the matched terms of each premise.
    pub explain: bool,
}

impl RankRequest {
    /// A request for `goal` with the defaults: 20 premises, every declaration, all signals.
    pub fn new(goal: impl Into<String>) -> RankRequest {
        RankRequest {
            goal: goal.into(),
            limit: DEFAULT_LIMIT,
            place: None,
            kinds: None,
            signals: None,
            all_goals: false,
            explain: false,
        }
    }
}

/// What one signal said about one premise.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SignalEvidence {
    pub signal: Signal,
    /// 1-based rank of the premise in that signal's own list.
    pub rank: u32,
    pub score: f32,
}

/// One premise of a ranking.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct RankedPremise {
    pub id: DeclId,
    /// The final score (higher is better).
    pub score: f32,
    /// Each signal that ranked it, with its rank and score there.
    pub evidence: Vec<SignalEvidence>,
    /// With `explain`: the query's tokens found in the premise's name or statement.
    pub matched_terms: Vec<String>,
    /// With `explain`: the neighbour theorems whose proofs voted for it, strongest first.
    pub voters: Vec<DeclId>,
}

/// The answer to a [`RankRequest`].
#[derive(Clone, Debug)]
pub struct PremiseRanking {
    /// The goal as it was understood.
    pub goal: GoalState,
    /// The weighted query tokens drawn from it.
    pub terms: Vec<QueryTerm>,
    pub premises: Vec<RankedPremise>,
    /// How many declarations were allowed to answer.
    pub candidates: usize,
    pub elapsed: Duration,
}

/// Why a request could not be answered.
#[derive(Debug, thiserror::Error)]
pub enum RankError {
    #[error(transparent)]
    Goal(#[from] GoalError),
    #[error("limit {0} is out of range: ask for 1 to {MAX_LIMIT} premises")]
    Limit(usize),
    #[error("the goal gave no token to search for (only punctuation, hypothesis names or bound variables?)")]
    NoTerms,
    #[error("no signal selected: choose at least one of {}", Signal::ALL.map(|s| s.as_str()).join(", "))]
    NoSignals,
    #[error("searching the lexical index failed: {0}")]
    Lexical(#[from] LexicalError),
}

impl RankError {
    /// Whether the request (not the index) is at fault.
    pub fn is_user_error(&self) -> bool {
        !matches!(self, RankError::Lexical(_))
    }
}

/// How deep each signal looks before the fusion: deeper than any limit, so a premise that
/// two signals rank 60th and 80th can still make the fused top 20.
pub const FUSION_DEPTH: usize = 100;

/// One signal's list: (premise, score, voters) best first.
type SignalList = Vec<(DeclId, f32, Vec<DeclId>)>;

/// Ranks the premises of `index` for `request`.
///
/// One signal selected: its own list. Several (or `signals: None`, all): each looks
/// [`FUSION_DEPTH`] deep and the lists are fused by reciprocal rank fusion with the
/// index's weights; every premise carries each signal's rank and score.
pub fn rank(index: &OpenIndex, request: &RankRequest) -> Result<PremiseRanking, RankError> {
    let started = Instant::now();
    if request.limit == 0 || request.limit > MAX_LIMIT {
        return Err(RankError::Limit(request.limit));
    }
    let signals = request.signals.as_deref().unwrap_or(&Signal::ALL);
    if signals.is_empty() {
        return Err(RankError::NoSignals);
    }
    let goal = parse_goal(&request.goal)?;
    let selection = if request.all_goals {
        GoalSelection::All
    } else {
        GoalSelection::First
    };
    let terms = goal.query_terms(&index.tokenizer, selection);
    if terms.is_empty() {
        return Err(RankError::NoTerms);
    }
    let library = &index.library;
    let filter = match (&request.place, &request.kinds) {
        (None, None) => index.default_candidates.clone(),
        (place, kinds) => Arc::new(accessible_premises(
            library,
            place.as_ref(),
            Some(kinds.as_deref().unwrap_or(&DEFAULT_KINDS)),
        )),
    };
    let candidates = filter.count();
    let mut selected: Vec<Signal> = Vec::new();
    for s in signals {
        if !selected.contains(s) {
            selected.push(*s);
        }
    }
    let fused = selected.len() > 1;
    let depth = if fused {
        FUSION_DEPTH.max(request.limit)
    } else {
        request.limit
    };
    let goal_vector = index.dense.as_ref().map(|d| {
        let tokens: Vec<&str> = terms.iter().map(|t| t.text.as_str()).collect();
        d.encoder.encode_goal(&tokens)
    });
    // Each search runs once: the lexical scores and the dense hits serve both the premise
    // lists and the neighbour theorems, under their two filters.
    let wants = |s: Signal| selected.contains(&s);
    let neighbours_wanted = wants(Signal::Neighbours);
    let voters = neighbours_wanted.then(|| index.votable_filter.intersection(&filter));
    let k_near = index.vote_params.neighbours;
    // One lexical scoring for both lists, picked as the scores are collected.
    let [mut lexical_premises, mut lexical_near] = if wants(Signal::Lexical) || neighbours_wanted {
        let premises_n = if wants(Signal::Lexical) { depth } else { 0 };
        let voters_n = if voters.is_some() { k_near } else { 0 };
        let mut found = index
            .lexical
            .top_lists(
                &terms,
                &index.lexical_boosts,
                &[
                    (Some(&*filter), premises_n),
                    (Some(voters.as_ref().unwrap_or(&filter)), voters_n),
                ],
            )?
            .into_iter();
        [
            found.next().unwrap_or_default(),
            found.next().unwrap_or_default(),
        ]
    } else {
        [Vec::new(), Vec::new()]
    };
    // One dense search for both lists; a list nobody wants is asked for 0 hits.
    let [mut dense_premises, dense_voters] = match (&index.dense, &goal_vector) {
        (Some(d), Some(v)) => {
            let premises_n = if wants(Signal::Dense) { depth } else { 0 };
            let voters_n = if voters.is_some() { k_near } else { 0 };
            let mut found = d
                .search_allowed_many(
                    v,
                    &[
                        (&*filter, premises_n),
                        (voters.as_ref().unwrap_or(&filter), voters_n),
                    ],
                )
                .into_iter();
            [
                found.next().unwrap_or_default(),
                found.next().unwrap_or_default(),
            ]
        }
        _ => [Vec::new(), Vec::new()],
    };
    let mut lists: Vec<(Signal, SignalList)> = Vec::new();
    for &signal in &selected {
        let list: SignalList = match signal {
            Signal::Lexical => std::mem::take(&mut lexical_premises)
                .into_iter()
                .map(|(id, s)| (id, s, Vec::new()))
                .collect(),
            Signal::Dense => std::mem::take(&mut dense_premises)
                .into_iter()
                .map(|(id, s)| (id, s, Vec::new()))
                .collect(),
            Signal::Neighbours => {
                let near = nearest_theorems(std::mem::take(&mut lexical_near), &dense_voters);
                neighbour_votes(
                    &library.graph,
                    &index.usage,
                    &near,
                    Some(&filter),
                    &index.vote_params,
                    depth,
                )
                .into_iter()
                .map(|v| (v.id, v.score, v.voters))
                .collect()
            }
        };
        lists.push((signal, list));
    }
    let order: Vec<(DeclId, f32)> = if fused {
        let ids: Vec<(Vec<DeclId>, f32)> = lists
            .iter()
            .map(|(s, l)| {
                (
                    l.iter().map(|x| x.0).collect(),
                    index.fusion.weight(s.as_str()),
                )
            })
            .collect();
        let borrowed: Vec<(&[DeclId], f32)> = ids.iter().map(|(l, w)| (l.as_slice(), *w)).collect();
        reciprocal_rank_fusion(&borrowed, index.fusion.k)
    } else {
        lists
            .first()
            .map(|(_, l)| l.iter().map(|x| (x.0, x.1)).collect())
            .unwrap_or_default()
    };
    let mut premises: Vec<RankedPremise> = order
        .into_iter()
        .take(request.limit)
        .map(|(id, score)| {
            let mut evidence = Vec::new();
            let mut voters = Vec::new();
            for (signal, list) in &lists {
                if let Some(pos) = list.iter().position(|x| x.0 == id) {
                    evidence.push(SignalEvidence {
                        signal: *signal,
                        rank: pos as u32 + 1,
                        score: list[pos].1,
                    });
                    if *signal == Signal::Neighbours && request.explain {
                        voters = list[pos].2.clone();
                    }
                }
            }
            RankedPremise {
                id,
                score,
                evidence,
                matched_terms: Vec::new(),
                voters,
            }
        })
        .collect();
    if request.explain {
        for p in &mut premises {
            p.matched_terms = matched_terms(index, p.id, &terms);
        }
    }
    Ok(PremiseRanking {
        goal,
        terms,
        premises,
        candidates,
        elapsed: started.elapsed(),
    })
}

/// The votable theorems nearest the goal, with similarities in 0..=1, from BM25's top
/// (scores over the best one) and the dense signal's top (cosine). A theorem found by both
/// is listed twice and so votes twice.
fn nearest_theorems(lexical: Vec<(DeclId, f32)>, dense: &[(DeclId, f32)]) -> Vec<(DeclId, f32)> {
    let top = lexical.first().map_or(1.0, |h| h.1.max(f32::MIN_POSITIVE));
    let mut near: Vec<(DeclId, f32)> = lexical.into_iter().map(|(id, s)| (id, s / top)).collect();
    near.extend(dense.iter().map(|&(id, s)| (id, s.max(0.0))));
    near
}

/// The query tokens that occur in a premise's name or statement, in query order.
pub fn matched_terms(index: &OpenIndex, id: DeclId, terms: &[QueryTerm]) -> Vec<String> {
    let d = index.library.declaration(id);
    let local = crate::index::lexical::local_name(&index.library, id);
    let mut tokens: Vec<String> = index
        .tokenizer
        .tokenize(local)
        .texts()
        .map(str::to_string)
        .collect();
    tokens.extend(
        index
            .tokenizer
            .tokenize(&d.statement)
            .texts()
            .map(str::to_string),
    );
    terms
        .iter()
        .filter(|t| tokens.contains(&t.text))
        .map(|t| t.text.clone())
        .collect()
}
