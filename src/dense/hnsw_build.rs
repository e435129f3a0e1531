//! Building an HNSW graph: insertion into the layers, one point at a time or from rayon's
//! threads.
//!
//! Takes a [`VectorSet`] of unit vectors and the graph's settings; gives each point's top
//! layer, its neighbour lists on every layer it is on, and the entry point. The method is
//! the HNSW paper's (Malkov and Yashunin, "Efficient and robust approximate nearest
//! neighbor search using Hierarchical Navigable Small World graphs", 2016/2018): a point's
//! top layer is drawn as `⌊−ln(u) / ln(M)⌋` (Algorithm 1's `mL = 1/ln(M)`); a greedy
//! descent finds the entry of its top layer; on each layer below, a beam of width
//! `ef_construction` (Algorithm 2) gives candidates, the neighbour-selection heuristic
//! (Algorithm 4, without extending the candidates and without keeping pruned ones) picks
//! at most the layer's cap of them (2·M on layer 0, M above, as `hnsw_rs` does), each
//! picked neighbour links back, and a list that grows past its cap keeps its closest
//! points. Similarity is the dot product of unit vectors.
//!
//! Why our own and not `hnsw_rs`'s insertion: on the same 20,000 vectors of dimension 64,
//! `hnsw_rs` took 10.0 s one point at a time and 5.0 s on two threads
//! (`cargo bench --bench dense -- hnsw/build`, docs/performance.md); its beam keeps a
//! `HashMap` of visited points and allocates an `Arc` per candidate. Here the vectors stay
//! in one flat array, visited points are marked in a per-thread array of epochs, and each
//! point's lists sit behind their own mutex, taken for one copy or one update at a time
//! (never two at once, so threads cannot deadlock).
//!
//! A point's top layer depends only on its id (a SplitMix64 draw keyed by the id), so the
//! sequential build, which inserts in id order, gives the same graph every time; the
//! parallel one depends on the threads' timing.

use std::cmp::{Ordering, Reverse};
use std::collections::BinaryHeap;
use std::sync::atomic::{AtomicUsize, Ordering as AtomicOrdering};
use std::sync::{Mutex, RwLock};

use rayon::prelude::*;

use super::exact::dot;
use super::seeded::SplitMix64;
use super::vectors::VectorSet;

/// The stream the points' top layers are drawn from.
const LEVEL_SEED: u64 = 0x6c61_7965_7273;

/// A similarity with the order the heaps need (by similarity, then the smaller id first).
#[derive(Clone, Copy, PartialEq, Debug)]
pub(super) struct Scored(pub f32, pub u32);

impl Eq for Scored {}

impl Ord for Scored {
    fn cmp(&self, other: &Self) -> Ordering {
        self.0.total_cmp(&other.0).then(other.1.cmp(&self.1))
    }
}

impl PartialOrd for Scored {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

/// The graph a build gives: per point its neighbour lists, layer 0 first (as many lists
/// as the point has layers), and the entry point (a point on the top layer).
pub(super) struct BuiltGraph {
    pub adjacency: Vec<Vec<Vec<u32>>>,
    pub entry: u32,
}

/// Per-thread scratch: visited marks by epoch, and the beam's heaps and buffers.
struct Scratch {
    epoch: u32,
    seen: Vec<u32>,
    candidates: BinaryHeap<Scored>,
    results: BinaryHeap<Reverse<Scored>>,
    links: Vec<u32>,
}

impl Scratch {
    fn new(n: usize) -> Scratch {
        Scratch {
            epoch: 0,
            seen: vec![0; n],
            candidates: BinaryHeap::new(),
            results: BinaryHeap::new(),
            links: Vec::new(),
        }
    }

    /// Starts a new beam: every point unvisited.
    fn reset(&mut self) {
        self.epoch = self.epoch.wrapping_add(1);
        if self.epoch == 0 {
            self.seen.fill(0);
            self.epoch = 1;
        }
        self.candidates.clear();
        self.results.clear();
    }

    /// Marks `id` visited; false when it already was.
    fn visit(&mut self, id: u32) -> bool {
        match self.seen.get_mut(id as usize) {
            Some(mark) if *mark != self.epoch => {
                *mark = self.epoch;
                true
            }
            _ => false,
        }
    }
}

/// The graph while it is being built.
struct Builder<'a> {
    vectors: &'a VectorSet,
    m: usize,
    ef_construction: usize,
    levels: Vec<usize>,
    /// Per point, its lists on layers `0..=levels[point]`.
    links: Vec<Mutex<Vec<Vec<u32>>>>,
    /// The entry point and its layer.
    entry: RwLock<(u32, usize)>,
}

/// A point's top layer: `⌊−ln(u)·mL⌋` with `u` uniform in (0, 1], capped below `max`.
fn level_of(id: u32, ml: f64, max: usize) -> usize {
    let u = 1.0 - SplitMix64::new(LEVEL_SEED).fork(u64::from(id)).next_f64();
    ((-u.ln() * ml) as usize).min(max - 1)
}

impl Builder<'_> {
    fn vector(&self, id: u32) -> &[f32] {
        self.vectors.get(id).unwrap_or(&[])
    }

    fn sim(&self, a: u32, query: &[f32]) -> f32 {
        dot(self.vector(a), query)
    }

    /// Copies `point`'s list on `layer` into `out`.
    fn copy_links(&self, point: u32, layer: usize, out: &mut Vec<u32>) {
        out.clear();
        if let Some(node) = self.links.get(point as usize) {
            let lists = node.lock().unwrap_or_else(|e| e.into_inner());
            if let Some(list) = lists.get(layer) {
                out.extend_from_slice(list);
            }
        }
    }

    /// The beam search of width `ef` on `layer` from `entries` (Algorithm 2); the results,
    /// best first, are left in `found`.
    fn search_layer(
        &self,
        query: &[f32],
        entries: &[Scored],
        ef: usize,
        layer: usize,
        s: &mut Scratch,
        found: &mut Vec<Scored>,
    ) {
        s.reset();
        for &e in entries {
            if s.visit(e.1) {
                s.candidates.push(e);
                s.results.push(Reverse(e));
            }
        }
        while s.results.len() > ef {
            s.results.pop();
        }
        let mut links = std::mem::take(&mut s.links);
        while let Some(c) = s.candidates.pop() {
            let worst = s.results.peek().map_or(f32::NEG_INFINITY, |r| r.0 .0);
            if c.0 < worst && s.results.len() >= ef {
                break;
            }
            self.copy_links(c.1, layer, &mut links);
            for &nb in &links {
                if !s.visit(nb) {
                    continue;
                }
                let scored = Scored(self.sim(nb, query), nb);
                let worst = s.results.peek().map_or(f32::NEG_INFINITY, |r| r.0 .0);
                if s.results.len() < ef || scored.0 > worst {
                    s.candidates.push(scored);
                    s.results.push(Reverse(scored));
                    if s.results.len() > ef {
                        s.results.pop();
                    }
                }
            }
        }
        s.links = links;
        found.clear();
        found.extend(s.results.drain().map(|r| r.0));
        found.sort_unstable_by(|a, b| b.cmp(a));
    }

    /// The neighbour-selection heuristic (Algorithm 4): from `candidates`, best first, keep
    /// one when it is more similar to the base point than to every point kept before it;
    /// at most `keep`.
    fn select(&self, candidates: &[Scored], keep: usize, out: &mut Vec<u32>) {
        out.clear();
        for c in candidates {
            if out.len() >= keep {
                break;
            }
            let v = self.vector(c.1);
            if out.iter().all(|&r| self.sim(r, v) < c.0) {
                out.push(c.1);
            }
        }
    }

    /// Adds `new` to `point`'s list on `layer`; when the list grows past `cap` it keeps the
    /// `cap` points most similar to `point` (shrinking by the selection heuristic instead
    /// cost recall at narrow beams in the test against `hnsw_rs`).
    fn link_back(&self, point: u32, new: u32, layer: usize, cap: usize) {
        let Some(node) = self.links.get(point as usize) else {
            return;
        };
        let mut lists = node.lock().unwrap_or_else(|e| e.into_inner());
        let Some(list) = lists.get_mut(layer) else {
            return;
        };
        if list.contains(&new) {
            return;
        }
        if list.len() < cap {
            list.push(new);
            return;
        }
        let base = self.vector(point);
        let mut candidates: Vec<Scored> = list
            .iter()
            .chain(std::iter::once(&new))
            .map(|&id| Scored(self.sim(id, base), id))
            .collect();
        candidates.sort_unstable_by(|a, b| b.cmp(a));
        candidates.truncate(cap);
        list.clear();
        list.extend(candidates.iter().map(|c| c.1));
    }

    /// Inserts `point` (Algorithm 1).
    fn insert(&self, point: u32, s: &mut Scratch) {
        let level = self.levels.get(point as usize).copied().unwrap_or(0);
        let (entry, top) = *self.entry.read().unwrap_or_else(|e| e.into_inner());
        let query = self.vector(point);
        let mut current = Scored(self.sim(entry, query), entry);
        let mut links = Vec::new();
        for layer in (level + 1..=top).rev() {
            loop {
                self.copy_links(current.1, layer, &mut links);
                let best = links
                    .iter()
                    .map(|&nb| Scored(self.sim(nb, query), nb))
                    .max()
                    .filter(|b| *b > current);
                match best {
                    Some(b) => current = b,
                    None => break,
                }
            }
        }
        let mut entries = vec![current];
        let mut found = Vec::new();
        let mut chosen = Vec::new();
        for layer in (0..=level.min(top)).rev() {
            self.search_layer(query, &entries, self.ef_construction, layer, s, &mut found);
            found.retain(|c| c.1 != point);
            let cap = if layer == 0 { 2 * self.m } else { self.m };
            self.select(&found, cap, &mut chosen);
            if let Some(node) = self.links.get(point as usize) {
                let mut lists = node.lock().unwrap_or_else(|e| e.into_inner());
                if let Some(list) = lists.get_mut(layer) {
                    list.clone_from(&chosen);
                }
            }
            for &nb in &chosen {
                self.link_back(nb, point, layer, cap);
            }
            entries.clone_from(&found);
        }
        if level > top {
            let mut guard = self.entry.write().unwrap_or_else(|e| e.into_inner());
            if level > guard.1 {
                *guard = (point, level);
            }
        }
    }
}

/// Builds the graph over `vectors` (non-empty, unit rows): `m` neighbours per point on
/// the upper layers and `2·m` on layer 0, a beam of `ef_construction`, at most
/// `max_layers` layers; on rayon's threads when `parallel`.
pub(super) fn build_graph(
    vectors: &VectorSet,
    m: usize,
    ef_construction: usize,
    max_layers: usize,
    parallel: bool,
) -> BuiltGraph {
    let n = vectors.len();
    let ml = 1.0 / (m.max(2) as f64).ln();
    let levels: Vec<usize> = (0..n as u32)
        .map(|id| level_of(id, ml, max_layers))
        .collect();
    let links = levels
        .iter()
        .map(|&l| Mutex::new(vec![Vec::new(); l + 1]))
        .collect();
    let builder = Builder {
        vectors,
        m,
        ef_construction,
        entry: RwLock::new((0, levels.first().copied().unwrap_or(0))),
        levels,
        links,
    };
    if parallel {
        // Each thread takes the next id from a shared counter, so points go in close to id
        // order whatever the thread count, and each thread has one scratch.
        let next = AtomicUsize::new(1);
        (0..rayon::current_num_threads())
            .into_par_iter()
            .for_each(|_| {
                let mut s = Scratch::new(n);
                loop {
                    let id = next.fetch_add(1, AtomicOrdering::Relaxed);
                    if id >= n {
                        break;
                    }
                    builder.insert(id as u32, &mut s);
                }
            });
    } else {
        let mut s = Scratch::new(n);
        for id in 1..n as u32 {
            builder.insert(id, &mut s);
        }
    }
    let entry = builder.entry.read().unwrap_or_else(|e| e.into_inner()).0;
    let adjacency = builder
        .links
        .into_iter()
        .map(|node| node.into_inner().unwrap_or_else(|e| e.into_inner()))
        .collect();
    BuiltGraph { adjacency, entry }
}
