//! Interval estimates: the Wilson score interval for a proportion (Wilson, JASA 1927; its
//! coverage compared in Newcombe, Stat Med 1998;17:857–872) and a seeded percentile
//! bootstrap for any metric (Efron & Tibshirani, An Introduction to the Bootstrap, 1993,
//! ch. 13, from memory).

use crate::error::Result;
use crate::random::{Purpose, Quick};
use crate::spread::{self, Spread};

use super::{bad, quantile_sorted};

/// A two-sided interval.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Interval {
    pub low: f64,
    pub high: f64,
}

/// The Wilson score interval for `successes` out of `total` at normal quantile `z`
/// (1.96 for 95%: [`super::Z95`]). None when `total` is 0 or `successes > total`.
pub fn wilson(successes: u64, total: u64, z: f64) -> Option<Interval> {
    if total == 0 || successes > total {
        return None;
    }
    let n = total as f64;
    let p = successes as f64 / n;
    let z2 = z * z;
    let centre = (p + z2 / (2.0 * n)) / (1.0 + z2 / n);
    let half = z / (1.0 + z2 / n) * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt();
    Some(Interval {
        low: (centre - half).max(0.0),
        high: (centre + half).min(1.0),
    })
}

/// What a percentile bootstrap gives.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct BootstrapInterval {
    /// The metric on all rows (every weight 1).
    pub estimate: f64,
    pub low: f64,
    pub high: f64,
    /// The level asked for (0.95 for a 95% interval).
    pub level: f64,
    /// Resamples on which the metric was defined and used for the interval.
    pub used: usize,
    /// Resamples on which the metric was undefined (say, a resample with one class only);
    /// they are left out, which a user must be told when it is not 0.
    pub undefined: usize,
}

/// A percentile bootstrap interval of `metric` over `rows` rows.
///
/// Resample `b` (0-based) draws `rows` rows with replacement from
/// `random::Quick::new(seed, Purpose::MetricResample, b)` (xoshiro256++ keyed by that
/// ChaCha8 stream), one exactly uniform row per draw by [`Quick::below`] (Lemire's
/// multiply-shift with rejection), so every resample is the same whatever order or thread
/// computes it. The
/// metric sees the resample as weights: how many times each row was drawn (0, 1, 2, ...),
/// so a metric that accepts weights and has its rows sorted once is O(rows) per resample.
/// It returns None where it is undefined on a resample; those resamples are counted in
/// `undefined` and left out. When more than half are undefined the interval is refused.
/// `spread` runs blocks of resamples on a caller's threads (same result).
///
/// The interval is the (1 − level)/2 and (1 + level)/2 quantiles of the resampled values
/// (type 7 interpolation).
pub fn bootstrap<F>(
    rows: usize,
    resamples: usize,
    level: f64,
    seed: u64,
    spread: Option<Spread<'_>>,
    metric: F,
) -> Result<BootstrapInterval>
where
    F: Fn(&[f64]) -> Option<f64> + Sync,
{
    let mut one = bootstrap_many(rows, resamples, level, seed, 1, spread, |w, out| {
        out[0] = metric(w)
    })?;
    one.pop()
        .unwrap_or_else(|| Err(bad("the bootstrap interval", "no figure")))
}

/// Resamples per job handed to a [`Spread`]: enough that a job's own buffer and start-up
/// are small beside its work, few enough that two or more threads share 2,000 evenly.
const RESAMPLES_PER_JOB: usize = 25;

/// Fills `counts` with how often each row is drawn in resample `b` (see [`bootstrap`]).
pub(crate) fn draw_resample(seed: u64, b: usize, counts: &mut [f64]) {
    counts.iter_mut().for_each(|c| *c = 0.0);
    let rows = counts.len();
    let mut rng = Quick::new(seed, Purpose::MetricResample, b as u64);
    for _ in 0..rows {
        counts[rng.below(rows as u64) as usize] += 1.0;
    }
}

/// Percentile bootstrap intervals of `figures` metrics at once, from the same resamples as
/// [`bootstrap`] (resample b is the same rows for every metric, and the same as
/// [`bootstrap`]'s): `metric` fills one value per figure (None where undefined) for the
/// resample given as weights, so work shared by several figures is done once per resample.
/// Each figure's interval (or why it has none) in order.
pub fn bootstrap_many<F>(
    rows: usize,
    resamples: usize,
    level: f64,
    seed: u64,
    figures: usize,
    spread: Option<Spread<'_>>,
    metric: F,
) -> Result<Vec<Result<BootstrapInterval>>>
where
    F: Fn(&[f64], &mut [Option<f64>]) + Sync,
{
    const WHAT: &str = "the bootstrap interval";
    if rows == 0 {
        return Err(bad(WHAT, "there are no rows to resample"));
    }
    if resamples < 2 {
        return Err(bad(
            WHAT,
            format!("{resamples} resample(s) asked for; use at least 2 (2,000 is usual)"),
        ));
    }
    if !(level > 0.0 && level < 1.0) {
        return Err(bad(
            WHAT,
            format!("the level {level} is not between 0 and 1; use 0.95 for a 95% interval"),
        ));
    }
    let mut estimates = vec![None; figures];
    metric(&vec![1.0; rows], &mut estimates);
    // Each job: its block of resamples' values, figure by figure per resample (NaN where
    // undefined).
    let jobs = resamples.div_ceil(RESAMPLES_PER_JOB);
    let blocks = spread::map(spread, jobs, |job| {
        let block = job * RESAMPLES_PER_JOB..((job + 1) * RESAMPLES_PER_JOB).min(resamples);
        let mut counts = vec![0.0; rows];
        let mut out = vec![None; figures];
        let mut values = Vec::with_capacity(block.len() * figures);
        for b in block {
            draw_resample(seed, b, &mut counts);
            out.iter_mut().for_each(|o| *o = None);
            metric(&counts, &mut out);
            values.extend(out.iter().map(|o| o.unwrap_or(f64::NAN)));
        }
        values
    });
    let mut values: Vec<Vec<f64>> = vec![Vec::with_capacity(resamples); figures];
    for block in &blocks {
        for one in block.chunks_exact(figures.max(1)) {
            for (v, &x) in values.iter_mut().zip(one) {
                if x.is_finite() {
                    v.push(x);
                }
            }
        }
    }
    Ok(estimates
        .into_iter()
        .zip(values)
        .map(|(estimate, mut values)| {
            let estimate = estimate.ok_or_else(|| {
                bad(
                    WHAT,
                    "the metric is undefined on the rows themselves, so it has no interval",
                )
            })?;
            let undefined = resamples - values.len();
            if values.len() * 2 < resamples {
                return Err(bad(
                    WHAT,
                    format!(
                        "the metric was undefined on {undefined} of {resamples} resamples (too \
                         few events, or one class only). Use more rows, or report no interval"
                    ),
                ));
            }
            values.sort_by(f64::total_cmp);
            Ok(BootstrapInterval {
                estimate,
                low: quantile_sorted(&values, (1.0 - level) / 2.0),
                high: quantile_sorted(&values, (1.0 + level) / 2.0),
                level,
                used: values.len(),
                undefined,
            })
        })
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::metrics::Z95;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn wilson_matches_newcombe_1998() {
        // Newcombe, Stat Med 1998;17:857–872, Table I examples (values in
        // shared/design/references.md, recomputed to 4 decimals).
        for (x, n, lo, hi) in [
            (81, 263, 0.2553, 0.3662),
            (15, 148, 0.0624, 0.1605),
            (0, 20, 0.0, 0.1611),
            (1, 29, 0.0061, 0.1718),
        ] {
            let i = wilson(x, n, Z95).unwrap();
            assert!(
                close(i.low, lo, 5e-5) && close(i.high, hi, 5e-5),
                "{x}/{n}: {i:?}"
            );
        }
        assert_eq!(wilson(0, 0, Z95), None);
        assert_eq!(wilson(3, 2, Z95), None);
    }

    #[test]
    fn bootstrap_is_seeded_and_brackets_the_mean() {
        // Mean of 0..100: a resample's weighted mean. Common practice, no source: the
        // percentile interval of a mean of 100 spread values brackets it and is narrower
        // than the range; the same seed gives the same interval, another seed another.
        let x: Vec<f64> = (0..100).map(f64::from).collect();
        let mean = |w: &[f64]| {
            let s: f64 = w.iter().sum();
            Some(x.iter().zip(w).map(|(a, b)| a * b).sum::<f64>() / s)
        };
        let a = bootstrap(100, 500, 0.95, 7, None, mean).unwrap();
        let b = bootstrap(100, 500, 0.95, 7, None, mean).unwrap();
        let c = bootstrap(100, 500, 0.95, 8, None, mean).unwrap();
        assert_eq!(a, b);
        assert_ne!(a.low, c.low);
        assert!(
            a.low < 49.5 && a.high > 49.5 && a.low > 40.0 && a.high < 59.0,
            "{a:?}"
        );
        // Standard error of the mean of 0..99 is about 2.9, so a 95% interval is about ±5.7.
        assert!(
            close(a.high - a.low, 2.0 * 1.96 * 28.87 / 10.0, 1.5),
            "{a:?}"
        );
        assert_eq!(a.undefined, 0);
    }

    #[test]
    fn bootstrap_refuses_bad_requests_and_mostly_undefined_metrics() {
        assert!(bootstrap(0, 100, 0.95, 1, None, |_| Some(1.0)).is_err());
        assert!(bootstrap(10, 1, 0.95, 1, None, |_| Some(1.0)).is_err());
        assert!(bootstrap(10, 100, 1.5, 1, None, |_| Some(1.0)).is_err());
        // Defined on all rows (every weight 1), undefined on every resample.
        let e = bootstrap(10, 100, 0.95, 1, None, |w| {
            w.iter().all(|&c| c == 1.0).then_some(1.0)
        })
        .unwrap_err();
        assert!(e.to_string().contains("of 100 resamples"), "{e}");
    }
}
