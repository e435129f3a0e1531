//! Sparse features of a token list: hashed unigrams and adjacent token pairs, tf-idf weighted.
//!
//! Takes a statement's tokens and the number of hash buckets; gives a [`FeatureBag`], the
//! list of buckets the tokens fall into with weights that sum to one (so an embedding
//! built from it is a weighted mean of table rows). The hash is FNV-1a 64, fixed and
//! portable, so a bucket means the same thing on every machine and in every run (never
//! `std`'s randomly keyed hasher). It does not tokenize and keeps no vocabulary: two
//! tokens that collide share a bucket.

use rayon::prelude::*;

const FNV_OFFSET: u64 = 0xcbf2_9ce4_8422_2325;
const FNV_PRIME: u64 = 0x0000_0100_0000_01b3;

/// FNV-1a, 64-bit, over `bytes` continuing from `hash`.
fn fnv1a_extend(mut hash: u64, bytes: &[u8]) -> u64 {
    for &b in bytes {
        hash ^= u64::from(b);
        hash = hash.wrapping_mul(FNV_PRIME);
    }
    hash
}

/// FNV-1a, 64-bit, of `bytes`.
pub fn fnv1a64(bytes: &[u8]) -> u64 {
    fnv1a_extend(FNV_OFFSET, bytes)
}

/// The features of one token list: `(bucket, weight)` sorted by bucket, each bucket once,
/// weights positive and summing to one. Empty when the list has no tokens.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct FeatureBag {
    pub entries: Vec<(u32, f32)>,
}

impl FeatureBag {
    /// True when no token gave a feature.
    pub fn is_empty(&self) -> bool {
        self.entries.is_empty()
    }
}

/// Hashes tokens into a fixed number of buckets.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct FeatureHasher {
    buckets: u32,
}

impl FeatureHasher {
    /// A hasher into `buckets` buckets (at least 1; the encoder checks its settings).
    pub fn new(buckets: u32) -> FeatureHasher {
        FeatureHasher {
            buckets: buckets.max(1),
        }
    }

    /// The number of buckets.
    pub fn buckets(&self) -> u32 {
        self.buckets
    }

    fn bucket(&self, hash: u64) -> u32 {
        (hash % u64::from(self.buckets)) as u32
    }

    /// The bucket of every unigram and every adjacent pair of `tokens`, with repeats, in
    /// order: unigrams first, then pairs. A tag byte keeps the unigram `a` apart from any
    /// pair, and a zero byte between the two halves of a pair keeps `ab c` apart from `a bc`.
    pub fn raw_buckets<S: AsRef<str>>(&self, tokens: &[S]) -> Vec<u32> {
        let mut out = Vec::with_capacity(tokens.len() * 2);
        for t in tokens {
            let h = fnv1a_extend(fnv1a_extend(FNV_OFFSET, &[1]), t.as_ref().as_bytes());
            out.push(self.bucket(h));
        }
        for pair in tokens.windows(2) {
            let mut h = fnv1a_extend(FNV_OFFSET, &[2]);
            h = fnv1a_extend(h, pair[0].as_ref().as_bytes());
            h = fnv1a_extend(h, &[0]);
            h = fnv1a_extend(h, pair[1].as_ref().as_bytes());
            out.push(self.bucket(h));
        }
        out
    }

    /// The distinct buckets of `tokens`, sorted.
    pub fn distinct_buckets<S: AsRef<str>>(&self, tokens: &[S]) -> Vec<u32> {
        let mut b = self.raw_buckets(tokens);
        b.sort_unstable();
        b.dedup();
        b
    }

    /// The tf-idf weighted features of `tokens`: term frequency (count in the list) times
    /// the bucket's idf, normalised to sum to one.
    pub fn bag<S: AsRef<str>>(&self, tokens: &[S], idf: &InverseDocumentFrequency) -> FeatureBag {
        let mut raw = self.raw_buckets(tokens);
        raw.sort_unstable();
        let mut entries: Vec<(u32, f32)> = Vec::new();
        for chunk in raw.chunk_by(|a, b| a == b) {
            let bucket = chunk[0];
            let weight = chunk.len() as f32 * idf.weight(bucket);
            entries.push((bucket, weight));
        }
        let total: f32 = entries.iter().map(|e| e.1).sum();
        if total > 0.0 {
            for e in &mut entries {
                e.1 /= total;
            }
        }
        FeatureBag { entries }
    }
}

/// Inverse document frequency per bucket, counted over a premise corpus.
///
/// Smoothed as `ln((1 + N) / (1 + df)) + 1`, where `N` is the number of premises and `df`
/// the number of premises with a feature in the bucket: every weight is at least 1 and a
/// bucket no premise uses gets the largest weight (the smoothing scikit-learn's
/// `TfidfVectorizer(smooth_idf=True)` documents).
#[derive(Clone, Debug, PartialEq)]
pub struct InverseDocumentFrequency {
    weights: Vec<f32>,
}

impl InverseDocumentFrequency {
    /// Counts document frequencies over `premises` (each a statement's tokens).
    pub fn from_corpus<S: AsRef<str> + Sync>(
        hasher: &FeatureHasher,
        premises: &[Vec<S>],
    ) -> InverseDocumentFrequency {
        let per_premise: Vec<Vec<u32>> = premises
            .par_iter()
            .map(|p| hasher.distinct_buckets(p))
            .collect();
        let mut df = vec![0u32; hasher.buckets() as usize];
        for buckets in &per_premise {
            for &b in buckets {
                if let Some(d) = df.get_mut(b as usize) {
                    *d += 1;
                }
            }
        }
        let n = premises.len() as f64;
        let weights = df
            .iter()
            .map(|&d| (((1.0 + n) / (1.0 + f64::from(d))).ln() + 1.0) as f32)
            .collect();
        InverseDocumentFrequency { weights }
    }

    /// Weights as saved (one per bucket); see [`InverseDocumentFrequency::weights`].
    pub fn from_weights(weights: Vec<f32>) -> InverseDocumentFrequency {
        InverseDocumentFrequency { weights }
    }

    /// The weight of `bucket` (1 for a bucket outside the table).
    pub fn weight(&self, bucket: u32) -> f32 {
        self.weights.get(bucket as usize).copied().unwrap_or(1.0)
    }

    /// All weights, one per bucket.
    pub fn weights(&self) -> &[f32] {
        &self.weights
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fnv1a_matches_published_test_vectors() {
        // FNV-1a 64-bit test vectors from the FNV reference (Fowler, Noll, Vo; IETF draft
        // draft-eastlake-fnv, test suite): "" -> cbf29ce484222325, "a" -> af63dc4c8601ec8c,
        // "foobar" -> 85944171f73967e8 (from memory).
        assert_eq!(fnv1a64(b""), 0xcbf2_9ce4_8422_2325);
        assert_eq!(fnv1a64(b"a"), 0xaf63_dc4c_8601_ec8c);
        assert_eq!(fnv1a64(b"foobar"), 0x8594_4171_f739_67e8);
    }

    #[test]
    fn unigrams_and_pairs_are_counted() {
        let h = FeatureHasher::new(1 << 20);
        let tokens = ["push", "ring", "push"];
        // 3 unigrams + 2 adjacent pairs.
        assert_eq!(h.raw_buckets(&tokens).len(), 5);
        // "push" twice: 4 distinct features unless two collide in 2^20 buckets.
        assert_eq!(h.distinct_buckets(&tokens).len(), 4);
        let swapped = h.raw_buckets(&["ring", "push"]);
        assert_ne!(h.raw_buckets(&["push", "ring"])[2], swapped[2]);
    }

    #[test]
    fn idf_follows_the_smoothed_formula() {
        // Smoothed idf ln((1+N)/(1+df)) + 1 as documented for scikit-learn's TfidfVectorizer
        // (smooth_idf=True). Hand-worked: N = 3; "head" is in all three premises, so its
        // weight is ln(4/4) + 1 = 1; "tail" is in one, so ln(4/2) + 1 = 1.6931.
        let h = FeatureHasher::new(1 << 16);
        let corpus = vec![
            vec!["head", "tail"],
            vec!["head", "size"],
            vec!["head", "capacity"],
        ];
        let idf = InverseDocumentFrequency::from_corpus(&h, &corpus);
        let head = h.raw_buckets(&["head"])[0];
        let tail = h.raw_buckets(&["tail"])[0];
        assert!((idf.weight(head) - 1.0).abs() < 1e-6);
        assert!((idf.weight(tail) - (2.0f32.ln() + 1.0)).abs() < 1e-5);
    }

    #[test]
    fn bag_weights_are_tf_idf_normalised() {
        let h = FeatureHasher::new(1 << 16);
        let corpus = vec![vec!["enqueue", "size"], vec!["size"]];
        let idf = InverseDocumentFrequency::from_corpus(&h, &corpus);
        let bag = h.bag(&["size", "size", "enqueue"], &idf);
        let total: f32 = bag.entries.iter().map(|e| e.1).sum();
        assert!((total - 1.0).abs() < 1e-6);
        assert!(bag.entries.windows(2).all(|w| w[0].0 < w[1].0));
        // "size" (tf 2, idf 1) against "enqueue" (tf 1, idf ln(3/2)+1): ratio 2 / 1.405.
        let size = h.raw_buckets(&["size"])[0];
        let enq = h.raw_buckets(&["enqueue"])[0];
        let w = |b| {
            bag.entries
                .iter()
                .find(|e| e.0 == b)
                .map(|e| e.1)
                .unwrap_or(0.0)
        };
        let expected = 2.0 / ((1.5f32).ln() + 1.0);
        assert!((w(size) / w(enq) - expected).abs() < 1e-4);
        assert!(h.bag::<&str>(&[], &idf).is_empty());
    }
}
