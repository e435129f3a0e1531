//! The contrastive loss of one batch and its gradient with respect to the table rows.
//!
//! Takes the encoder, the premises' features and a batch of (goal, positive premise, hard
//! negatives) examples; gives the batch's mean InfoNCE loss and the gradient of that mean
//! for every table row the batch touches, in row order. Candidates for an example are its
//! positive, the other examples' positives (in-batch negatives) and its own hard negatives,
//! each premise once; a premise the same goal also uses is never a negative of it.
//!
//! Work is spread with rayon over premises and examples and collected in order; every sum
//! runs sequentially in a fixed order, so the result does not depend on the thread count.
//! It does not update anything: the optimiser is in `train`.

use std::collections::{HashMap, HashSet};

use rayon::prelude::*;

use super::features::FeatureBag;
use super::learned::{normalised, weighted_mean, LearnedEncoder, Side};

/// One example of a batch.
pub(crate) struct Example<'a> {
    /// Which goal it is (to know the goal's other positives).
    pub goal_id: u32,
    pub goal: &'a FeatureBag,
    /// Premise index of the positive.
    pub positive: u32,
    pub hard_negatives: &'a [u32],
}

/// The gradient of the batch's mean loss, per touched row (sorted by row).
pub(crate) struct BatchGradient {
    /// Sum of the examples' losses (divide by the batch size for the mean).
    pub loss_sum: f64,
    pub goal_rows: Vec<(u32, Vec<f64>)>,
    pub premise_rows: Vec<(u32, Vec<f64>)>,
}

/// One example's loss, dL/dz of its goal, and dL/dscore per candidate premise slot.
struct ExampleOutcome {
    loss: f64,
    dz_goal: Vec<f64>,
    coeffs: Vec<(usize, f64)>,
}

struct Embedded {
    z: Vec<f64>,
    norm: f64,
}

fn embed(enc: &LearnedEncoder, side: Side, bag: &FeatureBag) -> Embedded {
    let (z, norm) = normalised(&weighted_mean(enc.table(side), bag));
    Embedded { z, norm }
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// dL/de from dL/dz for z = e / |e|: (dz − z (z·dz)) / |e|.
fn through_normalisation(e: &Embedded, dz: &[f64]) -> Vec<f64> {
    if e.norm == 0.0 {
        return vec![0.0; dz.len()];
    }
    let zd = dot(&e.z, dz);
    dz.iter()
        .zip(&e.z)
        .map(|(d, z)| (d - z * zd) / e.norm)
        .collect()
}

/// Adds `w · de` to the gradient of every row of `bag`, creating rows on first touch.
fn scatter(rows: &mut HashMap<u32, Vec<f64>>, bag: &FeatureBag, de: &[f64]) {
    for &(bucket, w) in &bag.entries {
        let g = rows.entry(bucket).or_insert_with(|| vec![0.0; de.len()]);
        let w = f64::from(w);
        for (gi, d) in g.iter_mut().zip(de) {
            *gi += w * d;
        }
    }
}

fn sorted_rows(rows: HashMap<u32, Vec<f64>>) -> Vec<(u32, Vec<f64>)> {
    let mut v: Vec<(u32, Vec<f64>)> = rows.into_iter().collect();
    v.sort_unstable_by_key(|r| r.0);
    v
}

/// Loss and gradient of one batch; `positives` holds every (goal id, premise) pair of the
/// training data, `premise_bags` the features of every premise by index (the caller has
/// checked every index is in range; an index outside is skipped, not a panic).
pub(crate) fn batch_gradient(
    enc: &LearnedEncoder,
    premise_bags: &[FeatureBag],
    batch: &[Example<'_>],
    temperature: f64,
    positives: &HashSet<(u32, u32)>,
) -> BatchGradient {
    let empty = FeatureBag::default();
    let bag_of = |p: u32| premise_bags.get(p as usize).unwrap_or(&empty);

    // Premise slots: every premise the batch mentions, in order of first mention.
    let mut slot_of: HashMap<u32, usize> = HashMap::new();
    let mut slot_premise: Vec<u32> = Vec::new();
    let mention = batch.iter().map(|ex| ex.positive).chain(
        batch
            .iter()
            .flat_map(|ex| ex.hard_negatives.iter().copied()),
    );
    for p in mention {
        slot_of.entry(p).or_insert_with(|| {
            slot_premise.push(p);
            slot_premise.len() - 1
        });
    }
    let premises: Vec<Embedded> = slot_premise
        .par_iter()
        .map(|&p| embed(enc, Side::Premise, bag_of(p)))
        .collect();
    let goals: Vec<Embedded> = batch
        .par_iter()
        .map(|ex| embed(enc, Side::Goal, ex.goal))
        .collect();

    let per_example: Vec<ExampleOutcome> = batch
        .par_iter()
        .zip(goals.par_iter())
        .map(|(ex, g)| {
            let mut seen = vec![false; slot_premise.len()];
            let mut cands: Vec<usize> = Vec::new();
            let pos_slot = slot_of.get(&ex.positive).copied().unwrap_or(0);
            seen[pos_slot] = true;
            cands.push(pos_slot);
            let others = batch
                .iter()
                .map(|o| o.positive)
                .chain(ex.hard_negatives.iter().copied());
            for p in others {
                let Some(&s) = slot_of.get(&p) else { continue };
                if seen[s] || positives.contains(&(ex.goal_id, p)) {
                    continue;
                }
                seen[s] = true;
                cands.push(s);
            }
            let scores: Vec<f64> = cands
                .iter()
                .map(|&s| dot(&g.z, &premises[s].z) / temperature)
                .collect();
            let max = scores.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            let exps: Vec<f64> = scores.iter().map(|s| (s - max).exp()).collect();
            let total: f64 = exps.iter().sum();
            let loss = total.ln() + max - scores[0];
            // dL/dscore_c = softmax_c − [c is the positive]; score = cos / τ.
            let coeffs: Vec<(usize, f64)> = cands
                .iter()
                .zip(&exps)
                .enumerate()
                .map(|(i, (&s, e))| {
                    let y = if i == 0 { 1.0 } else { 0.0 };
                    (s, (e / total - y) / temperature)
                })
                .collect();
            let mut dz_goal = vec![0.0; g.z.len()];
            for &(s, c) in &coeffs {
                for (d, z) in dz_goal.iter_mut().zip(&premises[s].z) {
                    *d += c * z;
                }
            }
            ExampleOutcome {
                loss,
                dz_goal,
                coeffs,
            }
        })
        .collect();

    let scale = 1.0 / batch.len().max(1) as f64;
    let dim = enc.settings().dim as usize;
    let mut dz_premise = vec![vec![0.0; dim]; slot_premise.len()];
    let mut loss_sum = 0.0;
    for (outcome, g) in per_example.iter().zip(&goals) {
        loss_sum += outcome.loss;
        for &(s, c) in &outcome.coeffs {
            for (d, z) in dz_premise[s].iter_mut().zip(&g.z) {
                *d += scale * c * z;
            }
        }
    }

    let goal_de: Vec<Vec<f64>> = per_example
        .par_iter()
        .zip(goals.par_iter())
        .map(|(outcome, g)| {
            let dz: Vec<f64> = outcome.dz_goal.iter().map(|d| d * scale).collect();
            through_normalisation(g, &dz)
        })
        .collect();
    let premise_de: Vec<Vec<f64>> = premises
        .par_iter()
        .zip(dz_premise.par_iter())
        .map(|(p, dz)| through_normalisation(p, dz))
        .collect();

    let mut goal_rows = HashMap::new();
    for (ex, de) in batch.iter().zip(&goal_de) {
        scatter(&mut goal_rows, ex.goal, de);
    }
    let mut premise_rows = HashMap::new();
    for (&p, de) in slot_premise.iter().zip(&premise_de) {
        scatter(&mut premise_rows, bag_of(p), de);
    }
    BatchGradient {
        loss_sum,
        goal_rows: sorted_rows(goal_rows),
        premise_rows: sorted_rows(premise_rows),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dense::learned::EncoderSettings;

    fn tiny() -> (LearnedEncoder, Vec<FeatureBag>, Vec<FeatureBag>) {
        let premises = vec![
            vec!["push", "full", "buf"],
            vec!["pop", "empty", "buf"],
            vec!["size", "push", "succ"],
            vec!["tick", "queue"],
        ];
        let goals = [
            vec!["push", "buf", "size"],
            vec!["pop", "buf"],
            vec!["tick", "size"],
        ];
        let settings = EncoderSettings {
            buckets: 16,
            dim: 4,
            seed: 9,
        };
        let enc = LearnedEncoder::initial(settings, &premises).expect("valid settings");
        let pbags = premises.iter().map(|p| enc.features(p)).collect();
        let gbags = goals.iter().map(|g| enc.features(g)).collect();
        (enc, pbags, gbags)
    }

    fn mean_loss(
        enc: &LearnedEncoder,
        pbags: &[FeatureBag],
        gbags: &[FeatureBag],
        tau: f64,
    ) -> BatchGradient {
        let hard: [&[u32]; 3] = [&[3], &[2, 0], &[]];
        let batch: Vec<Example<'_>> = [(0u32, 2u32), (1, 1), (2, 3)]
            .iter()
            .enumerate()
            .map(|(i, &(g, p))| Example {
                goal_id: g,
                goal: &gbags[i],
                positive: p,
                hard_negatives: hard[i],
            })
            .collect();
        let positives: HashSet<(u32, u32)> = [(0, 2), (1, 1), (2, 3)].into_iter().collect();
        batch_gradient(enc, pbags, &batch, tau, &positives)
    }

    /// Central differences against the analytic gradient (common practice for checking
    /// backpropagation): relative error |a − n| / max(|a|, |n|) below 1e-3 for every entry
    /// of every touched row, on both tables, at a mild and at the default temperature.
    #[test]
    fn gradient_matches_finite_differences() {
        for tau in [0.5, 0.05] {
            let (enc, pbags, gbags) = tiny();
            let analytic = mean_loss(&enc, &pbags, &gbags, tau);
            let mut checked = 0;
            for (side, rows) in [
                (Side::Goal, &analytic.goal_rows),
                (Side::Premise, &analytic.premise_rows),
            ] {
                for (row, grad) in rows {
                    for (col, &a) in grad.iter().enumerate() {
                        let mut plus = enc.clone();
                        let mut minus = enc.clone();
                        let h = 1e-4f32;
                        let (tp, tm) = match side {
                            Side::Goal => (&mut plus.goal_table, &mut minus.goal_table),
                            Side::Premise => (&mut plus.premise_table, &mut minus.premise_table),
                        };
                        let x = tp[[*row as usize, col]];
                        tp[[*row as usize, col]] = x + h;
                        tm[[*row as usize, col]] = x - h;
                        let step = f64::from(x + h) - f64::from(x - h);
                        let lp = mean_loss(&plus, &pbags, &gbags, tau).loss_sum / 3.0;
                        let lm = mean_loss(&minus, &pbags, &gbags, tau).loss_sum / 3.0;
                        let n = (lp - lm) / step;
                        let scale = a.abs().max(n.abs());
                        if scale < 1e-6 {
                            assert!((a - n).abs() < 1e-7, "row {row} col {col}: {a} vs {n}");
                            continue;
                        }
                        let rel = (a - n).abs() / scale;
                        assert!(rel < 1e-3, "τ {tau} row {row} col {col}: {a} vs {n}");
                        checked += 1;
                    }
                }
            }
            assert!(checked > 20, "only {checked} entries had a gradient");
        }
    }

    #[test]
    fn loss_of_a_lone_positive_is_zero() {
        // One example, no negatives: softmax over one candidate gives loss ln 1 = 0.
        let (enc, pbags, gbags) = tiny();
        let batch = [Example {
            goal_id: 0,
            goal: &gbags[0],
            positive: 2,
            hard_negatives: &[],
        }];
        let g = batch_gradient(&enc, &pbags, &batch, 0.05, &HashSet::new());
        assert!(g.loss_sum.abs() < 1e-12);
    }
}
