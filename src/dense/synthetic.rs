//! Seeded synthetic inputs for the dense signal's tests and benchmarks.
//!
//! Takes a seed and sizes; gives (1) a small training task set in our own scenarios, a
//! bounded ring buffer and a task scheduler, where each goal's tokens overlap those of
//! the premises its "proof" uses, and (2) clustered unit vectors for nearest-neighbour
//! checks. It is not a model of any real library: real figures come from real libraries.

use super::seeded::SplitMix64;
use super::train::{TrainingData, TrainingPair, Validation};
use super::vectors::VectorSet;
use super::DenseError;

const RING: [&str; 16] = [
    "ring_push",
    "ring_pop",
    "capacity",
    "size",
    "head",
    "tail",
    "is_full",
    "is_empty",
    "wrap",
    "slot",
    "buf",
    "modulo",
    "succ",
    "len",
    "peek",
    "clear",
];
const SCHEDULER: [&str; 16] = [
    "ready_queue",
    "tick",
    "task",
    "priority",
    "preempt",
    "run",
    "block",
    "wake",
    "quantum",
    "idle",
    "dispatch",
    "runnable",
    "deadline",
    "fair",
    "yield_cpu",
    "waiting",
];
const SYMBOLS: [&str; 11] = ["=", "≤", "<", "+", "(", ")", "∀", "→", "∧", "0", "1"];

fn pick<'a>(rng: &mut SplitMix64, words: &[&'a str]) -> &'a str {
    words.get(rng.below(words.len())).copied().unwrap_or("=")
}

/// A premise: three topical words of one domain with symbols between them.
fn premise_tokens(
    rng: &mut SplitMix64,
    domain: &[&'static str],
) -> (Vec<String>, Vec<&'static str>) {
    let mut topical: Vec<&str> = Vec::new();
    while topical.len() < 3 {
        let w = pick(rng, domain);
        if !topical.contains(&w) {
            topical.push(w);
        }
    }
    let mut tokens = Vec::new();
    for w in &topical {
        tokens.push(w.to_string());
        tokens.push(pick(rng, &SYMBOLS).to_string());
    }
    tokens.push(topical[0].to_string());
    (tokens, topical)
}

/// A goal using `uses` premises: two of each one's topical words, two unrelated words of
/// the domain and a few symbols, shuffled.
fn goal_tokens(
    rng: &mut SplitMix64,
    topical: &[Vec<&'static str>],
    uses: &[usize],
    domain: &[&'static str],
) -> Vec<String> {
    let mut words: Vec<&str> = Vec::new();
    for &u in uses {
        let mut t = topical.get(u).cloned().unwrap_or_default();
        rng.shuffle(&mut t);
        words.extend(t.into_iter().take(2));
    }
    words.push(pick(rng, domain));
    words.push(pick(rng, domain));
    for _ in 0..3 {
        words.push(pick(rng, &SYMBOLS));
    }
    rng.shuffle(&mut words);
    words.into_iter().map(str::to_string).collect()
}

/// Ring-buffer and scheduler lemmas: `premises` premises (half each domain), `goals`
/// training goals each using two premises of its domain, and `held_out` further goals as
/// a recall@10 validation set over the same premises.
pub fn ring_and_scheduler_task(
    seed: u64,
    premises: usize,
    goals: usize,
    held_out: usize,
) -> (TrainingData, Validation) {
    let mut rng = SplitMix64::new(seed);
    let domains = [&RING[..], &SCHEDULER[..]];
    let mut data = TrainingData::default();
    let mut topical = Vec::new();
    for p in 0..premises {
        let (tokens, words) = premise_tokens(&mut rng, domains[p % 2]);
        data.premises.push(tokens);
        topical.push(words);
    }
    let make_goal = |rng: &mut SplitMix64| -> (Vec<String>, Vec<usize>) {
        let d = rng.below(2);
        let half = premises.div_ceil(2).max(1);
        let a = (rng.below(half) * 2 + d).min(premises.saturating_sub(1));
        let b = (rng.below(half) * 2 + d).min(premises.saturating_sub(1));
        let uses = if a == b { vec![a] } else { vec![a, b] };
        (goal_tokens(rng, &topical, &uses, domains[d]), uses)
    };
    for g in 0..goals {
        let (tokens, uses) = make_goal(&mut rng);
        data.goals.push(tokens);
        for u in uses {
            data.pairs.push(TrainingPair {
                goal: g as u32,
                premise: u as u32,
            });
        }
    }
    let mut validation = Validation {
        k: 10,
        ..Validation::default()
    };
    for g in 0..held_out {
        let (tokens, uses) = make_goal(&mut rng);
        validation.goals.push(tokens);
        for u in uses {
            validation.pairs.push(TrainingPair {
                goal: g as u32,
                premise: u as u32,
            });
        }
    }
    (data, validation)
}

/// `n` unit vectors of dimension `dim` around `clusters` random centres (Gaussian noise of
/// standard deviation `spread` per coordinate before normalising).
pub fn clustered_vectors(
    seed: u64,
    n: usize,
    dim: usize,
    clusters: usize,
    spread: f64,
) -> Result<VectorSet, DenseError> {
    clustered_vectors_and_queries(seed, n, 0, dim, clusters, spread).map(|(v, _)| v)
}

/// As [`clustered_vectors`], plus `queries` further draws from the same clusters (not in
/// the set), for measuring search.
pub fn clustered_vectors_and_queries(
    seed: u64,
    n: usize,
    queries: usize,
    dim: usize,
    clusters: usize,
    spread: f64,
) -> Result<(VectorSet, VectorSet), DenseError> {
    let mut rng = SplitMix64::new(seed);
    let centres: Vec<Vec<f64>> = (0..clusters.max(1))
        .map(|_| {
            (0..dim)
                .map(|_| rng.next_gaussian() / (dim as f64).sqrt())
                .collect()
        })
        .collect();
    let mut draw = |set: &mut VectorSet| -> Result<u32, DenseError> {
        let c = &centres[rng.below(centres.len())];
        let v: Vec<f64> = c
            .iter()
            .map(|x| x + spread * rng.next_gaussian() / (dim as f64).sqrt())
            .collect();
        let norm = v
            .iter()
            .map(|x| x * x)
            .sum::<f64>()
            .sqrt()
            .max(f64::MIN_POSITIVE);
        let row: Vec<f32> = v.iter().map(|x| (x / norm) as f32).collect();
        set.push(&row)
    };
    let mut set = VectorSet::new(dim)?;
    for _ in 0..n {
        draw(&mut set)?;
    }
    let mut qs = VectorSet::new(dim)?;
    for _ in 0..queries {
        draw(&mut qs)?;
    }
    Ok((set, qs))
}
