//! A small seeded random number generator (SplitMix64) for initial weights, shuffling and
//! synthetic test data.
//!
//! Takes a 64-bit seed; gives a reproducible stream of `u64`, uniform `f32`/`f64` and
//! Gaussian values. Streams can be forked by a key (a table row, an epoch), so values that
//! are generated in parallel do not depend on the order or the thread that asks for them.
//! It is not a cryptographic generator and does not try to be one.

/// SplitMix64 (Steele, Lea and Flood, "Fast splittable pseudorandom number generators",
/// OOPSLA 2014): one 64-bit state, a Weyl increment and a 64-bit mixing function.
#[derive(Clone, Debug)]
pub struct SplitMix64 {
    state: u64,
}

const GOLDEN_GAMMA: u64 = 0x9e37_79b9_7f4a_7c15;

fn mix64(mut z: u64) -> u64 {
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

impl SplitMix64 {
    /// A generator whose stream is fixed by `seed`.
    pub fn new(seed: u64) -> SplitMix64 {
        SplitMix64 { state: seed }
    }

    /// An independent generator for `key` (a row number, an epoch) under the same seed:
    /// the same `(seed, key)` always gives the same stream.
    pub fn fork(&self, key: u64) -> SplitMix64 {
        SplitMix64 {
            state: mix64(self.state ^ mix64(key.wrapping_add(GOLDEN_GAMMA))),
        }
    }

    /// The next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.state = self.state.wrapping_add(GOLDEN_GAMMA);
        mix64(self.state)
    }

    /// Uniform in `[0, 1)`, 53 bits of precision.
    pub fn next_f64(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Uniform in `[-1, 1)`.
    pub fn next_signed_f32(&mut self) -> f32 {
        (self.next_f64() * 2.0 - 1.0) as f32
    }

    /// Standard normal, by the Box–Muller transform.
    pub fn next_gaussian(&mut self) -> f64 {
        // 1 - u lies in (0, 1], so the logarithm is finite.
        let u1 = 1.0 - self.next_f64();
        let u2 = self.next_f64();
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }

    /// Uniform in `0..n` (`n > 0`; returns 0 for `n == 0`), by Lemire's multiply-shift,
    /// whose bias is below 2^-32 for the sizes used here.
    pub fn below(&mut self, n: usize) -> usize {
        ((self.next_u64() >> 32).wrapping_mul(n as u64) >> 32) as usize
    }

    /// Shuffles `items` in place (Fisher–Yates).
    pub fn shuffle<T>(&mut self, items: &mut [T]) {
        for i in (1..items.len()).rev() {
            let j = self.below(i + 1);
            items.swap(i, j);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn matches_the_reference_splitmix64_stream() {
        // The first outputs of Vigna's reference `splitmix64.c` seeded with 0 (from memory:
        // 0xe220a8397b1dcdaf, 0x6e789e6aa1b965f4, 0x06c45d188009454f).
        let mut g = SplitMix64::new(0);
        assert_eq!(g.next_u64(), 0xe220_a839_7b1d_cdaf);
        assert_eq!(g.next_u64(), 0x6e78_9e6a_a1b9_65f4);
        assert_eq!(g.next_u64(), 0x06c4_5d18_8009_454f);
    }

    #[test]
    fn forks_differ_and_repeat() {
        let base = SplitMix64::new(7);
        let a: Vec<u64> = (0..4).map(|_| base.fork(1).next_u64()).collect();
        assert!(a.windows(2).all(|w| w[0] == w[1]));
        assert_ne!(base.fork(1).next_u64(), base.fork(2).next_u64());
    }

    #[test]
    fn gaussian_has_unit_variance() {
        // Mean 0 and variance 1 of the standard normal (common practice); 20k draws put the
        // sample figures within a few hundredths.
        let mut g = SplitMix64::new(11);
        let xs: Vec<f64> = (0..20_000).map(|_| g.next_gaussian()).collect();
        let mean = xs.iter().sum::<f64>() / xs.len() as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / xs.len() as f64;
        assert!(mean.abs() < 0.03, "mean {mean}");
        assert!((var - 1.0).abs() < 0.05, "variance {var}");
    }

    #[test]
    fn shuffle_is_a_permutation() {
        let mut g = SplitMix64::new(3);
        let mut v: Vec<u32> = (0..100).collect();
        g.shuffle(&mut v);
        assert_ne!(v, (0..100).collect::<Vec<u32>>());
        v.sort_unstable();
        assert_eq!(v, (0..100).collect::<Vec<u32>>());
    }
}
