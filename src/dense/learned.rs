//! The learned encoder: one embedding table per side, a goal or premise vector being the
//! tf-idf weighted mean of its features' rows, L2-normalised.
//!
//! Takes the settings and the premise corpus (for idf); gives an [`Encoder`] that is ready
//! to use before training and that [`crate::dense::train::train`] improves. Both tables
//! start from the same seeded random rows: an untrained encoder is then a random projection
//! of tf-idf vectors, whose cosines approximate tf-idf cosines (Johnson–Lindenstrauss), and
//! features that training never touches keep that lexical behaviour on both sides.
//!
//! Saved bytes hold the settings, the idf weights and only the rows training changed; the
//! rest is regenerated from the seed on load. It does not train (see `train`), and it keeps
//! no vocabulary: tokens are hashed.

use ndarray::Array2;
use rayon::prelude::*;

use super::codec::{PartReader, PartWriter};
use super::features::{FeatureBag, FeatureHasher, InverseDocumentFrequency};
use super::seeded::SplitMix64;
use super::{DenseError, Encoder};

const MAGIC: &[u8; 8] = b"QRYENC\0\x01";
const WHAT: &str = "dense encoder";
/// At most this many table entries per side, so a damaged header cannot ask for more
/// memory than a real encoder needs (2^28 f32 = 1 GiB).
const MAX_TABLE_ENTRIES: u64 = 1 << 28;

/// The shape of an encoder and the seed of its initial rows.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct EncoderSettings {
    /// Hash buckets for features (rows of each table). Default 2^18 = 262,144.
    pub buckets: u32,
    /// Vector dimension (columns of each table). Default 256.
    pub dim: u32,
    /// Seed of the initial rows. Default 0x7175_6172_7279 ("quarry").
    pub seed: u64,
}

impl Default for EncoderSettings {
    fn default() -> Self {
        EncoderSettings {
            buckets: 1 << 18,
            dim: 256,
            seed: 0x7175_6172_7279,
        }
    }
}

impl EncoderSettings {
    /// Checks the settings are usable; the error names the field.
    pub fn validate(&self) -> Result<(), DenseError> {
        if self.buckets == 0 {
            return Err(setting("buckets", "must be at least 1".into()));
        }
        if self.dim == 0 || self.dim > 4096 {
            return Err(setting("dim", format!("{} is outside 1..=4096", self.dim)));
        }
        if u64::from(self.buckets) * u64::from(self.dim) > MAX_TABLE_ENTRIES {
            return Err(setting(
                "buckets",
                format!(
                    "{} buckets of dimension {} exceed 2^28 entries per table",
                    self.buckets, self.dim
                ),
            ));
        }
        Ok(())
    }
}

fn setting(field: &'static str, message: String) -> DenseError {
    DenseError::InvalidSetting { field, message }
}

/// Which table a vector is read from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Side {
    Goal,
    Premise,
}

/// A trained (or freshly initialised) dense encoder. See the module documentation.
#[derive(Clone, Debug, PartialEq)]
pub struct LearnedEncoder {
    settings: EncoderSettings,
    hasher: FeatureHasher,
    idf: InverseDocumentFrequency,
    pub(crate) goal_table: Array2<f32>,
    pub(crate) premise_table: Array2<f32>,
}

/// The initial value of row `row`: uniform in ±sqrt(3/dim), so a row's expected squared
/// length is 1. Each row has its own stream, so rows can be made in parallel.
fn initial_row(seed: u64, row: usize, out: &mut [f32]) {
    let scale = (3.0 / out.len() as f32).sqrt();
    let mut rng = SplitMix64::new(seed).fork(row as u64);
    for v in out {
        *v = rng.next_signed_f32() * scale;
    }
}

fn initial_table(settings: &EncoderSettings) -> Array2<f32> {
    let (rows, dim) = (settings.buckets as usize, settings.dim as usize);
    let mut table = Array2::<f32>::zeros((rows, dim));
    if let Some(flat) = table.as_slice_mut() {
        flat.par_chunks_mut(dim)
            .enumerate()
            .for_each(|(r, row)| initial_row(settings.seed, r, row));
    }
    table
}

/// Row `r` of a table as a slice; `None` outside the table.
pub(crate) fn row_slice(table: &Array2<f32>, r: usize) -> Option<&[f32]> {
    let dim = table.ncols();
    table.as_slice()?.get(r * dim..(r + 1) * dim)
}

/// Row `r` of a table as a mutable slice; `None` outside the table.
pub(crate) fn row_slice_mut(table: &mut Array2<f32>, r: usize) -> Option<&mut [f32]> {
    let dim = table.ncols();
    table.as_slice_mut()?.get_mut(r * dim..(r + 1) * dim)
}

/// The tf-idf weighted mean of the bag's rows, in f64 (not normalised).
pub(crate) fn weighted_mean(table: &Array2<f32>, bag: &FeatureBag) -> Vec<f64> {
    let mut e = vec![0f64; table.ncols()];
    for &(bucket, w) in &bag.entries {
        if let Some(row) = row_slice(table, bucket as usize) {
            let w = f64::from(w);
            for (acc, &x) in e.iter_mut().zip(row) {
                *acc += w * f64::from(x);
            }
        }
    }
    e
}

/// `v / |v|`, or zeros for the zero vector; also returns `|v|`.
pub(crate) fn normalised(v: &[f64]) -> (Vec<f64>, f64) {
    let norm = v.iter().map(|x| x * x).sum::<f64>().sqrt();
    if norm > 0.0 {
        (v.iter().map(|x| x / norm).collect(), norm)
    } else {
        (vec![0.0; v.len()], 0.0)
    }
}

impl LearnedEncoder {
    /// An untrained encoder with idf counted over `premises` (each a premise statement's
    /// tokens).
    pub fn initial<S: AsRef<str> + Sync>(
        settings: EncoderSettings,
        premises: &[Vec<S>],
    ) -> Result<LearnedEncoder, DenseError> {
        settings.validate()?;
        let hasher = FeatureHasher::new(settings.buckets);
        let idf = InverseDocumentFrequency::from_corpus(&hasher, premises);
        let goal_table = initial_table(&settings);
        let premise_table = goal_table.clone();
        Ok(LearnedEncoder {
            settings,
            hasher,
            idf,
            goal_table,
            premise_table,
        })
    }

    /// The settings this encoder was made with.
    pub fn settings(&self) -> EncoderSettings {
        self.settings
    }

    /// The tf-idf weighted features of `tokens` (the same for both sides).
    pub fn features<S: AsRef<str>>(&self, tokens: &[S]) -> FeatureBag {
        self.hasher.bag(tokens, &self.idf)
    }

    pub(crate) fn table(&self, side: Side) -> &Array2<f32> {
        match side {
            Side::Goal => &self.goal_table,
            Side::Premise => &self.premise_table,
        }
    }

    /// The unit vector of a feature bag on one side (zeros for an empty bag).
    pub fn embed(&self, side: Side, bag: &FeatureBag) -> Vec<f32> {
        let (z, _) = normalised(&weighted_mean(self.table(side), bag));
        z.into_iter().map(|x| x as f32).collect()
    }

    /// [`Encoder::encode_goal`] for any token type.
    pub fn encode_goal_tokens<S: AsRef<str>>(&self, tokens: &[S]) -> Vec<f32> {
        self.embed(Side::Goal, &self.features(tokens))
    }

    /// [`Encoder::encode_premise`] for any token type.
    pub fn encode_premise_tokens<S: AsRef<str>>(&self, tokens: &[S]) -> Vec<f32> {
        self.embed(Side::Premise, &self.features(tokens))
    }

    /// Rows of `table` that differ from their initial value, in row order.
    fn changed_rows(&self, table: &Array2<f32>) -> Vec<usize> {
        let dim = self.settings.dim as usize;
        let seed = self.settings.seed;
        let flat = table.as_slice().unwrap_or(&[]);
        flat.par_chunks(dim)
            .enumerate()
            .filter_map(|(r, row)| {
                let mut init = vec![0f32; dim];
                initial_row(seed, r, &mut init);
                let same = init
                    .iter()
                    .zip(row)
                    .all(|(a, b)| a.to_bits() == b.to_bits());
                (!same).then_some(r)
            })
            .collect()
    }

    /// Reads an encoder written by [`LearnedEncoder::to_bytes`]; any damage or
    /// inconsistency is a [`DenseError::Decode`].
    pub fn from_bytes(bytes: &[u8]) -> Result<LearnedEncoder, DenseError> {
        let mut r = PartReader::open(WHAT, MAGIC, bytes)?;
        let settings = EncoderSettings {
            buckets: r.u32()?,
            dim: r.u32()?,
            seed: r.u64()?,
        };
        settings
            .validate()
            .map_err(|e| r.error(format!("bad header: {e}")))?;
        let (buckets, dim) = (settings.buckets as usize, settings.dim as usize);
        let weights = r.f32s(buckets)?;
        let mut goal_rows = Vec::new();
        let mut premise_rows = Vec::new();
        for rows in [&mut goal_rows, &mut premise_rows] {
            let count = r.u32()? as usize;
            // Each stored row takes 4 + 4·dim bytes: refuse a count the bytes cannot hold.
            if count.saturating_mul(4 + 4 * dim) > r.remaining() {
                return Err(r.error(format!("claims {count} stored rows, more than it holds")));
            }
            for _ in 0..count {
                let row = r.u32()? as usize;
                if row >= buckets {
                    return Err(r.error(format!("row {row} is outside {buckets} buckets")));
                }
                rows.push((row, r.f32s(dim)?));
            }
        }
        r.finish()?;
        let init = initial_table(&settings);
        let mut goal_table = init.clone();
        let mut premise_table = init;
        for (table, rows) in [
            (&mut goal_table, goal_rows),
            (&mut premise_table, premise_rows),
        ] {
            for (row, values) in rows {
                if let Some(dst) = row_slice_mut(table, row) {
                    dst.copy_from_slice(&values);
                }
            }
        }
        Ok(LearnedEncoder {
            settings,
            hasher: FeatureHasher::new(settings.buckets),
            idf: InverseDocumentFrequency::from_weights(weights),
            goal_table,
            premise_table,
        })
    }
}

impl Encoder for LearnedEncoder {
    fn dim(&self) -> usize {
        self.settings.dim as usize
    }

    fn encode_goal(&self, tokens: &[&str]) -> Vec<f32> {
        self.encode_goal_tokens(tokens)
    }

    fn encode_premise(&self, tokens: &[&str]) -> Vec<f32> {
        self.encode_premise_tokens(tokens)
    }
}

impl LearnedEncoder {
    /// The encoder as bytes, read back by [`LearnedEncoder::from_bytes`].
    ///
    /// Layout (little-endian): magic `QRYENC\0\x01`; buckets u32, dim u32, seed u64; idf,
    /// buckets × f32; per side (goal, then premise) a count u32 and that many rows, each
    /// its index u32 and dim × f32; BLAKE3 of all that.
    pub fn to_bytes(&self) -> Vec<u8> {
        let goal_rows = self.changed_rows(&self.goal_table);
        let premise_rows = self.changed_rows(&self.premise_table);
        let dim = self.settings.dim as usize;
        let size = 16
            + 4 * self.idf.weights().len()
            + (goal_rows.len() + premise_rows.len()) * (4 + 4 * dim);
        let mut w = PartWriter::new(MAGIC, size);
        w.u32(self.settings.buckets);
        w.u32(self.settings.dim);
        w.u64(self.settings.seed);
        w.f32s(self.idf.weights());
        for (table, rows) in [
            (&self.goal_table, &goal_rows),
            (&self.premise_table, &premise_rows),
        ] {
            w.u32(rows.len() as u32);
            for &r in rows {
                w.u32(r as u32);
                w.f32s(row_slice(table, r).unwrap_or(&[]));
            }
        }
        w.finish()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn small() -> EncoderSettings {
        EncoderSettings {
            buckets: 1 << 10,
            dim: 32,
            seed: 5,
        }
    }

    fn corpus() -> Vec<Vec<&'static str>> {
        vec![
            vec!["ring_push", "buf", "=", "buf", "++", "[", "x", "]"],
            vec!["size", "(", "ring_pop", "buf", ")", "<", "capacity"],
            vec!["ready_queue", "sched", "⊆", "tasks", "sched"],
        ]
    }

    #[test]
    fn vectors_are_unit_length_and_empty_is_zero() {
        let enc = LearnedEncoder::initial(small(), &corpus()).expect("valid settings");
        let v = enc.encode_goal(&["size", "ring_pop", "buf"]);
        assert_eq!(v.len(), 32);
        let norm: f32 = v.iter().map(|x| x * x).sum::<f32>().sqrt();
        assert!((norm - 1.0).abs() < 1e-5);
        assert!(enc.encode_premise(&[]).iter().all(|&x| x == 0.0));
    }

    #[test]
    fn untrained_sides_agree() {
        // Shared initial rows: before training, a statement's goal and premise vectors are equal.
        let enc = LearnedEncoder::initial(small(), &corpus()).expect("valid settings");
        let t = ["ready_queue", "sched"];
        assert_eq!(enc.encode_goal(&t), enc.encode_premise(&t));
    }

    #[test]
    fn bytes_round_trip_keeps_changed_rows() {
        let mut enc = LearnedEncoder::initial(small(), &corpus()).expect("valid settings");
        enc.premise_table[[3, 4]] += 0.25;
        enc.goal_table[[1000, 0]] = -0.5;
        let bytes = enc.to_bytes();
        let back = LearnedEncoder::from_bytes(&bytes).expect("own bytes load");
        assert_eq!(back, enc);
        let t = ["capacity", "buf"];
        assert_eq!(back.encode_goal(&t), enc.encode_goal(&t));
    }

    #[test]
    fn bad_bytes_are_typed_errors() {
        let enc = LearnedEncoder::initial(small(), &corpus()).expect("valid settings");
        let bytes = enc.to_bytes();
        for cut in [0, 7, 8, 40, bytes.len() - 1] {
            assert!(matches!(
                LearnedEncoder::from_bytes(&bytes[..cut]),
                Err(DenseError::Decode { .. })
            ));
        }
        let mut flipped = bytes.clone();
        flipped[20] ^= 0x80;
        assert!(matches!(
            LearnedEncoder::from_bytes(&flipped),
            Err(DenseError::Decode { .. })
        ));
        assert!(LearnedEncoder::from_bytes(b"not an encoder at all, just some text").is_err());
    }

    #[test]
    fn settings_are_checked() {
        let bad = EncoderSettings { dim: 0, ..small() };
        assert!(matches!(
            LearnedEncoder::initial(bad, &corpus()),
            Err(DenseError::InvalidSetting { field: "dim", .. })
        ));
    }
}
