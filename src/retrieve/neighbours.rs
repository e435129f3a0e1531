//! Dependency-neighbour votes: premises used by the proofs of theorems similar to the goal.
//!
//! Takes the goal's nearest theorems (from the lexical and dense signals, with their
//! similarities) and the dependency graph; gives premises scored by the votes of those
//! neighbours. This is k-nearest-neighbour premise selection (Kaliszyk & Urban; Blanchette
//! et al., "A learning-based fact selector for Isabelle/HOL", JAR 2016): each neighbour
//! votes for the premises its proof used, weighted by its similarity to the goal, and a
//! premise that almost every proof uses is damped by its inverse document frequency over
//! the voting proofs. The neighbours themselves are candidates too. Only proofs the index
//! may learn from (its votable set) vote, and only allowed premises are scored. It does not
//! find the neighbours itself: the caller runs the signals that do.

use serde::{Deserialize, Serialize};

use crate::library::{DeclId, DependencyGraph};
use crate::retrieve::accessible::PremiseFilter;

/// Parameters of the vote.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct VoteParams {
    /// How many neighbours each neighbour-finding signal contributes.
    pub neighbours: usize,
    /// Similarity exponent: above 1 favours the closest neighbours.
    pub sharpness: f32,
    /// A neighbour's own score, as a fraction of its similarity.
    pub self_weight: f32,
}

impl Default for VoteParams {
    /// Our defaults (common practice for k-NN selectors: a few dozen neighbours, votes
    /// sharpened towards the closest).
    fn default() -> VoteParams {
        VoteParams {
            neighbours: 40,
            sharpness: 2.0,
            self_weight: 0.5,
        }
    }
}

/// How often each declaration is used by a voting proof, and how many voting proofs there
/// are: the inverse document frequency of premises (computed once per declaration here, so
/// a vote reads it instead of taking a logarithm).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct PremiseUsage {
    uses: Vec<u32>,
    proofs: u32,
    idf: Vec<f32>,
}

impl PremiseUsage {
    /// Counts uses over the proofs of `voters` in `graph` (of `nodes` declarations).
    pub fn count(graph: &DependencyGraph, nodes: usize, voters: &[DeclId]) -> PremiseUsage {
        let mut uses = vec![0u32; nodes];
        let mut proofs = 0;
        for &d in voters {
            if graph.proof_uses.degree(d) == 0 {
                continue;
            }
            proofs += 1;
            for p in graph.premises(d) {
                if let Some(u) = uses.get_mut(p.0 as usize) {
                    *u += 1;
                }
            }
        }
        let idf = uses.iter().map(|&u| idf_of(proofs, u)).collect();
        PremiseUsage { uses, proofs, idf }
    }

    /// ln(1 + proofs / uses): large for rare premises, near 0 for ubiquitous ones.
    pub fn idf(&self, id: DeclId) -> f32 {
        self.idf
            .get(id.0 as usize)
            .copied()
            .unwrap_or_else(|| idf_of(self.proofs, 0))
    }

    /// How many voting proofs use `id`.
    pub fn uses(&self, id: DeclId) -> u32 {
        self.uses.get(id.0 as usize).copied().unwrap_or(0)
    }
}

/// ln(1 + proofs / uses), uses counted at least once.
fn idf_of(proofs: u32, uses: u32) -> f32 {
    (1.0 + proofs as f32 / uses.max(1) as f32).ln()
}

/// One premise scored by the vote, with the neighbours that voted for it.
#[derive(Clone, Debug, PartialEq)]
pub struct VotedPremise {
    pub id: DeclId,
    pub score: f32,
    /// The neighbours whose proofs use it, strongest vote first.
    pub voters: Vec<DeclId>,
}

/// Scores premises by the votes of `neighbours` ((theorem, similarity in 0..=1), any
/// order; a theorem listed twice votes twice). Returns the best `limit` premises, best
/// first, ties broken by id, each with the neighbours that voted for it.
///
/// The votes are gathered as (premise, vote) pairs and summed after a stable sort by
/// premise, so each premise's votes add up in neighbour order; the voters are listed only
/// for the premises kept (most voted premises fall outside the limit).
pub fn neighbour_votes(
    graph: &DependencyGraph,
    usage: &PremiseUsage,
    neighbours: &[(DeclId, f32)],
    allowed: Option<&PremiseFilter>,
    params: &VoteParams,
    limit: usize,
) -> Vec<VotedPremise> {
    let ok = |id: DeclId| allowed.is_none_or(|f| f.contains(id));
    let weight = |sim: f32| (!sim.is_nan() && sim > 0.0).then(|| sim.powf(params.sharpness));
    // Room for every vote at once: growing the vector was about a seventh of the vote's
    // time in the profile of docs/performance.md ("Where a fused ranking's time goes").
    let room = neighbours
        .iter()
        .map(|&(n, _)| graph.proof_uses.degree(n) + 1)
        .sum();
    let mut votes: Vec<(DeclId, f32)> = Vec::with_capacity(room);
    for &(n, sim) in neighbours {
        let Some(w) = weight(sim) else {
            continue;
        };
        if ok(n) && params.self_weight > 0.0 {
            votes.push((n, w * params.self_weight * usage.idf(n)));
        }
        votes.extend(
            graph
                .premises(n)
                .filter(|&p| ok(p))
                .map(|p| (p, w * usage.idf(p))),
        );
    }
    votes.sort_by_key(|v| v.0);
    let mut scored: Vec<(DeclId, f32)> = Vec::new();
    for (id, vote) in votes {
        match scored.last_mut() {
            Some(last) if last.0 == id => last.1 += vote,
            _ => scored.push((id, vote)),
        }
    }
    let order = |a: &(DeclId, f32), b: &(DeclId, f32)| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0));
    if scored.len() > limit {
        scored.select_nth_unstable_by(limit, order);
        scored.truncate(limit);
    }
    scored.sort_unstable_by(order);
    // The voters of the kept premises, strongest vote first: (place in `scored`, voter,
    // vote) for every vote a kept premise got, then sorted by place and vote. The places
    // are found by binary search over the kept ids.
    let mut place: Vec<(DeclId, usize)> =
        scored.iter().enumerate().map(|(i, s)| (s.0, i)).collect();
    place.sort_unstable();
    let mut kept_votes: Vec<(usize, DeclId, f32)> = Vec::new();
    for &(n, sim) in neighbours {
        let Some(w) = weight(sim) else {
            continue;
        };
        for p in graph.premises(n) {
            // Only allowed premises were scored, so only they have a place.
            if let Ok(at) = place.binary_search_by_key(&p, |x| x.0) {
                kept_votes.push((place[at].1, n, w * usage.idf(p)));
            }
        }
    }
    kept_votes.sort_by(|a, b| a.0.cmp(&b.0).then(b.2.total_cmp(&a.2)).then(a.1.cmp(&b.1)));
    let mut kept_votes = kept_votes.into_iter().peekable();
    scored
        .into_iter()
        .enumerate()
        .map(|(i, (id, score))| {
            let mut voters: Vec<DeclId> = Vec::new();
            while let Some((_, v, _)) = kept_votes.next_if(|x| x.0 == i) {
                if !voters.contains(&v) {
                    voters.push(v);
                }
            }
            VotedPremise { id, score, voters }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A hand-made graph of a stock ledger: theorems 0..=3, premises 4..=7.
    ///   0 (credit_total)  uses 4 (balance_def), 5 (credit_spec), 7 (nat_le)
    ///   1 (debit_total)   uses 4, 6 (debit_spec), 7
    ///   2 (audit_closed)  uses 7
    ///   3 (transfer_safe) uses 5, 6, 7  — not votable
    fn ledger() -> DependencyGraph {
        DependencyGraph::from_edges(
            8,
            &[
                (0, 4),
                (0, 5),
                (0, 7),
                (1, 4),
                (1, 6),
                (1, 7),
                (2, 7),
                (3, 5),
                (3, 6),
                (3, 7),
            ],
            &[],
        )
    }

    /// idf = ln(1 + proofs/uses) over the voting proofs 0, 1, 2 (hand-worked):
    ///   4: ln(1 + 3/2) = 0.9163   5: ln(1 + 3/1) = 1.3863   7: ln(1 + 3/3) = 0.6931
    /// Neighbours 0 (sim 1.0) and 1 (sim 0.5), sharpness 2, no self score:
    ///   4: 1·0.9163 + 0.25·0.9163 = 1.1454
    ///   5: 1·1.3863               = 1.3863
    ///   6: 0.25·1.3863            = 0.3466
    ///   7: 1·0.6931 + 0.25·0.6931 = 0.8664
    #[test]
    fn votes_are_weighted_by_similarity_and_damped_by_idf() {
        let g = ledger();
        let usage = PremiseUsage::count(&g, 8, &[DeclId(0), DeclId(1), DeclId(2)]);
        assert_eq!(usage.uses(DeclId(7)), 3);
        assert_eq!(
            usage.uses(DeclId(5)),
            1,
            "the non-voting proof 3 is not counted"
        );
        let params = VoteParams {
            neighbours: 2,
            sharpness: 2.0,
            self_weight: 0.0,
        };
        let out = neighbour_votes(
            &g,
            &usage,
            &[(DeclId(0), 1.0), (DeclId(1), 0.5)],
            None,
            &params,
            10,
        );
        let order: Vec<u32> = out.iter().map(|v| v.id.0).collect();
        assert_eq!(order, vec![5, 4, 7, 6]);
        let expect = [1.3863, 1.1454, 0.8664, 0.3466];
        for (v, e) in out.iter().zip(expect) {
            assert!((v.score - e).abs() < 1e-3, "{} vs {e}", v.score);
        }
        assert_eq!(out[1].voters, vec![DeclId(0), DeclId(1)]);
        assert_eq!(out[3].voters, vec![DeclId(1)]);
        // A limit keeps the best of the same list, with the same scores and voters.
        let top2 = neighbour_votes(
            &g,
            &usage,
            &[(DeclId(0), 1.0), (DeclId(1), 0.5)],
            None,
            &params,
            2,
        );
        assert_eq!(top2, out[..2].to_vec());
    }

    #[test]
    fn only_allowed_premises_are_scored_and_neighbours_are_candidates() {
        let g = ledger();
        let usage = PremiseUsage::count(&g, 8, &[DeclId(0), DeclId(1), DeclId(2)]);
        let mut allowed = PremiseFilter::all(8);
        allowed.remove(DeclId(5));
        let out = neighbour_votes(
            &g,
            &usage,
            &[(DeclId(0), 1.0)],
            Some(&allowed),
            &VoteParams::default(),
            10,
        );
        let ids: Vec<u32> = out.iter().map(|v| v.id.0).collect();
        assert!(!ids.contains(&5));
        assert!(ids.contains(&0), "the neighbour itself is a candidate");
        assert!(out.iter().all(|v| v.score > 0.0));
    }
}
