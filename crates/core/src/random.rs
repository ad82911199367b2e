//! Seeded random streams (ARCHITECTURE.md, invariant 2): every draw comes from a ChaCha8
//! stream keyed by (study seed, purpose, index) only, so tree 17 of a forest gets the same
//! numbers whatever order, thread or machine (native or wasm) fits it.

use rand_chacha::rand_core::{RngCore, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// What a stream is for; part of its key so different uses never share numbers.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[repr(u64)]
pub enum Purpose {
    /// The rows of tree `index` (bootstrap or subsample).
    TreeRows = 1,
    /// The predictors tried at each split of tree `index`.
    TreePredictors = 2,
    /// The rows of boosting round `index` (row subsampling).
    BoostRows = 3,
    /// The predictors of boosting tree `index` (round × outputs + output).
    BoostPredictors = 4,
    /// The rows held out for early stopping (`index` 0).
    BoostHoldout = 5,
    /// The rows of bootstrap resample `index` of a metric's percentile interval
    /// (metrics::intervals).
    MetricResample = 8,
    /// The order rows are dealt into validation folds (repeat `index`), the rows held out
    /// (`index` 0), and the order groups are placed in grouped folds (`index` 0).
    FoldRows = 9,
    /// The rows of bootstrap resample `index` of bootstrap validation (optimism correction).
    ValidationResample = 10,
    /// The candidates of a random tuning search (`index` 0).
    TuneDraws = 11,
    /// The row order of permutation `index` in permutation importance (explain).
    Permutation = 12,
    /// The order of a tree's out-of-bag rows in out-of-bag permutation importance
    /// (`index`: tree × predictors + predictor).
    OutOfBagPermutation = 13,
    /// The records sampled for ICE curves and the H statistic (`index` 0).
    ExplainSample = 14,
}

/// The stream for (`seed`, `purpose`, `index`).
pub fn stream(seed: u64, purpose: Purpose, index: u64) -> ChaCha8Rng {
    let mut key = [0u8; 32];
    key[..8].copy_from_slice(&seed.to_le_bytes());
    key[8..16].copy_from_slice(&(purpose as u64).to_le_bytes());
    key[16..24].copy_from_slice(&index.to_le_bytes());
    key[24..].copy_from_slice(b"spinney\0");
    ChaCha8Rng::from_seed(key)
}

/// A uniform draw from `0..n` (Lemire's multiply-shift; the bias is below 2⁻³² for any
/// n < 2³², far under anything a model could notice).
pub fn below(rng: &mut ChaCha8Rng, n: usize) -> usize {
    ((rng.next_u64() as u128 * n as u128) >> 64) as usize
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn streams_are_keyed_and_repeatable() {
        let a: Vec<usize> = (0..5)
            .map({
                let mut r = stream(7, Purpose::TreeRows, 3);
                move |_| below(&mut r, 1000)
            })
            .collect();
        let b: Vec<usize> = (0..5)
            .map({
                let mut r = stream(7, Purpose::TreeRows, 3);
                move |_| below(&mut r, 1000)
            })
            .collect();
        let c: Vec<usize> = (0..5)
            .map({
                let mut r = stream(7, Purpose::TreeRows, 4);
                move |_| below(&mut r, 1000)
            })
            .collect();
        assert_eq!(a, b);
        assert_ne!(a, c);
        assert!(a.iter().all(|&x| x < 1000));
    }
}
