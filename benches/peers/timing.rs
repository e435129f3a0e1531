//! Repeated timings and their medians, for the side-by-side harness.
//!
//! Takes a closure and a repeat count; gives the wall time of each run. It does not warm
//! anything up on its own: the first run is a run like the others, and the median keeps a
//! slow first run from counting.

use std::time::Instant;

/// The wall time in seconds of each of `repeats` runs of `work`.
pub fn repeat_timed(repeats: usize, mut work: impl FnMut()) -> Vec<f64> {
    (0..repeats)
        .map(|_| {
            let started = Instant::now();
            work();
            started.elapsed().as_secs_f64()
        })
        .collect()
}

/// The median of `values` (the mean of the two middle ones for an even count).
pub fn median(values: &[f64]) -> f64 {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    match v.len() {
        0 => f64::NAN,
        n if n % 2 == 1 => v[n / 2],
        n => (v[n / 2 - 1] + v[n / 2]) / 2.0,
    }
}

/// The `q`-quantile of `values` by nearest rank.
pub fn quantile(values: &[f64], q: f64) -> f64 {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    if v.is_empty() {
        return f64::NAN;
    }
    let rank = ((q * v.len() as f64).ceil() as usize).clamp(1, v.len());
    v[rank - 1]
}
