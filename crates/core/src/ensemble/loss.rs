//! The losses of gradient boosting: each gives its best constant score, per-row gradients and
//! hessians at the current scores, its value (for training and validation curves) and, for
//! absolute error and Huber, the leaf values that replace the Newton step.
//!
//! Scores are kept per row (`outputs` per row: one, or one per class for softmax). The
//! outcome is a number per row: the value itself, or the class code for class losses.
//! Sources: Friedman, Ann Stat 2001;29:1189–1232 (squared, absolute, Huber with its
//! quantile-chosen δ and the median leaf update of "M-TreeBoost", two-class logistic);
//! Chen & Guestrin 2016 (Newton leaves); softmax with Friedman's (K − 1)/K step factor
//! (algorithm 6), and Poisson with a log link, initial scores the log of the class shares and
//! of the mean count (as in scikit-learn's HistGradientBoosting losses, from memory).

use crate::ensemble::forest::argmax;

/// A gradient-boosting loss.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Loss {
    /// Two classes, log loss on the log-odds score.
    Logistic,
    /// Any number of classes, one score per class, softmax probabilities.
    Softmax,
    /// ½(y − f)².
    SquaredError,
    /// |y − f|.
    AbsoluteError,
    /// Squared within δ of the outcome, absolute beyond; δ is the `quantile` of the absolute
    /// residuals, chosen anew each round.
    Huber { quantile: f64 },
    /// Counts, log link: μ = e^f, loss μ − y·f.
    Poisson,
}

/// Smallest probability used in logs (keeps a class with no weight finite).
const TINY: f64 = 1e-15;

impl Loss {
    /// The word for this loss in settings and reports.
    pub fn word(self) -> &'static str {
        match self {
            Loss::Logistic => "logistic",
            Loss::Softmax => "softmax",
            Loss::SquaredError => "squared_error",
            Loss::AbsoluteError => "absolute_error",
            Loss::Huber { .. } => "huber",
            Loss::Poisson => "poisson",
        }
    }

    /// Whether the loss is for class outcomes.
    pub fn for_classes(self) -> bool {
        matches!(self, Loss::Logistic | Loss::Softmax)
    }

    /// Scores per row.
    pub fn outputs(self, classes: usize) -> usize {
        match self {
            Loss::Softmax => classes,
            _ => 1,
        }
    }

    /// The constant scores that minimise the loss over `rows` (weights `w`, may be `None`).
    pub fn initial(self, y: &[f64], w: Option<&[f64]>, rows: &[u32], classes: usize) -> Vec<f64> {
        let wt = |r: u32| w.map_or(1.0, |w| w[r as usize]);
        let total: f64 = rows.iter().map(|&r| wt(r)).sum::<f64>().max(TINY);
        let mean = || rows.iter().map(|&r| wt(r) * y[r as usize]).sum::<f64>() / total;
        match self {
            Loss::SquaredError => vec![mean()],
            Loss::AbsoluteError | Loss::Huber { .. } => {
                let mut pairs: Vec<(f64, f64)> =
                    rows.iter().map(|&r| (y[r as usize], wt(r))).collect();
                vec![weighted_median(&mut pairs)]
            }
            Loss::Poisson => vec![mean().max(TINY).ln()],
            Loss::Logistic => {
                let p = mean().clamp(TINY, 1.0 - TINY);
                vec![(p / (1.0 - p)).ln()]
            }
            Loss::Softmax => {
                let mut share = vec![0.0; classes];
                for &r in rows {
                    share[y[r as usize] as usize] += wt(r) / total;
                }
                share.iter().map(|p| p.max(TINY).ln()).collect()
            }
        }
    }

    /// δ of the Huber loss for this round: the weighted `quantile` of |y − f| over `rows`
    /// (Friedman 2001, algorithm 4). `None` for other losses.
    pub fn huber_delta(
        self,
        y: &[f64],
        scores: &[f64],
        w: Option<&[f64]>,
        rows: &[u32],
    ) -> Option<f64> {
        let Loss::Huber { quantile } = self else {
            return None;
        };
        let mut pairs: Vec<(f64, f64)> = rows
            .iter()
            .map(|&r| {
                let r = r as usize;
                ((y[r] - scores[r]).abs(), w.map_or(1.0, |w| w[r]))
            })
            .collect();
        Some(weighted_quantile(&mut pairs, quantile))
    }

    /// Gradient and hessian (times the row weight) of output `k` for every row, written as
    /// `(g, h)` pairs into `stats` (two numbers per row of the whole data).
    #[allow(clippy::too_many_arguments)]
    pub fn gradients(
        self,
        y: &[f64],
        scores: &[f64],
        w: Option<&[f64]>,
        k: usize,
        outputs: usize,
        delta: Option<f64>,
        rows: &[u32],
        stats: &mut [f64],
    ) {
        for &r in rows {
            let r = r as usize;
            let f = &scores[r * outputs..(r + 1) * outputs];
            let (g, h) = match self {
                Loss::SquaredError => (f[0] - y[r], 1.0),
                Loss::AbsoluteError => (sign(f[0] - y[r]), 1.0),
                Loss::Huber { .. } => {
                    let d = delta.unwrap_or(f64::INFINITY);
                    let res = y[r] - f[0];
                    (if res.abs() <= d { -res } else { -d * sign(res) }, 1.0)
                }
                Loss::Poisson => {
                    let mu = f[0].min(700.0).exp();
                    (mu - y[r], mu)
                }
                Loss::Logistic => {
                    let p = sigmoid(f[0]);
                    (p - y[r], p * (1.0 - p))
                }
                Loss::Softmax => {
                    // The hessian times K/(K − 1): all K scores move at once, and the diagonal
                    // Newton step alone overshoots (Friedman 2001, algorithm 6, the (K − 1)/K
                    // factor of the leaf value; LightGBM's multi-class hessian, from memory).
                    let p = softmax_share(f, k);
                    let target = (y[r] as usize == k) as u8 as f64;
                    let factor = outputs as f64 / (outputs as f64 - 1.0).max(1.0);
                    (p - target, factor * p * (1.0 - p))
                }
            };
            let wt = w.map_or(1.0, |w| w[r]);
            stats[2 * r] = wt * g;
            stats[2 * r + 1] = wt * h;
        }
    }

    /// Mean (weighted) loss over `rows`: half squared error, absolute error, Huber at `delta`,
    /// Poisson deviance / 2, log loss.
    pub fn value(
        self,
        y: &[f64],
        scores: &[f64],
        w: Option<&[f64]>,
        outputs: usize,
        delta: Option<f64>,
        rows: &[u32],
    ) -> f64 {
        let mut mean = WeightedMean::default();
        for &r in rows {
            let r = r as usize;
            let f = &scores[r * outputs..(r + 1) * outputs];
            let v = match self {
                Loss::SquaredError => 0.5 * (y[r] - f[0]).powi(2),
                Loss::AbsoluteError => (y[r] - f[0]).abs(),
                Loss::Huber { .. } => {
                    let d = delta.unwrap_or(f64::INFINITY);
                    let a = (y[r] - f[0]).abs();
                    if a <= d {
                        0.5 * a * a
                    } else {
                        d * (a - 0.5 * d)
                    }
                }
                Loss::Poisson => {
                    let mu = f[0].min(700.0).exp();
                    let yl = if y[r] > 0.0 {
                        y[r] * (y[r] / mu).ln()
                    } else {
                        0.0
                    };
                    yl - (y[r] - mu)
                }
                Loss::Logistic => {
                    // log(1 + e^f) − y·f, computed without overflow.
                    let x = f[0];
                    x.max(0.0) + (-x.abs()).exp().ln_1p() - y[r] * x
                }
                Loss::Softmax => -softmax_share(f, y[r] as usize).max(TINY).ln(),
            };
            mean.add(w.map_or(1.0, |w| w[r]), v);
        }
        mean.mean()
    }

    /// Two classes under the logistic loss, after a round (scores `scores`, one a row): the
    /// mean (weighted) loss over `rows` (ascending) as [`Loss::value`] gives it, the share of
    /// every row misclassified as [`crate::ensemble::boosting::staged_error`] counts it, and
    /// every row's probability as [`Loss::gradients`] computes it, kept in `probs` for the
    /// next round's [`logistic_gradients`]: one exponential a row where the three took one
    /// each (`e^−|x|` is the one [`sigmoid`] takes on either side of 0), the same numbers.
    pub fn logistic_pass(
        y: &[f64],
        scores: &[f64],
        w: Option<&[f64]>,
        rows: &[u32],
        probs: &mut [f64],
    ) -> (f64, f64) {
        let (mut mean, mut wrong) = (RowMean::new(rows, w), 0.0);
        for (r, (&x, p)) in scores.iter().zip(probs.iter_mut()).enumerate() {
            let e = (-x.abs()).exp();
            *p = if x >= 0.0 {
                1.0 / (1.0 + e)
            } else {
                e / (1.0 + e)
            };
            // Called an event when its share beats the other's (the first of equals wins).
            wrong += (usize::from(*p > 1.0 - *p) != y[r] as usize) as u8 as f64;
            mean.add(r, || x.max(0.0) + e.ln_1p() - y[r] * x);
        }
        (mean.mean(), wrong / scores.len() as f64)
    }

    /// [`Loss::logistic_pass`] for several classes under the softmax loss (`m` scores a
    /// row): the mean loss over `rows` as [`Loss::value`] gives it, the share of every row
    /// misclassified, and every row's `m` shares kept in `shares` for the next round's
    /// [`softmax_gradients`], each as [`softmax_share`] gives it (the same exponentials and
    /// sum), from `m` exponentials a row where the three took about `3·m·(m + 1)`.
    pub fn softmax_pass(
        y: &[f64],
        scores: &[f64],
        m: usize,
        w: Option<&[f64]>,
        rows: &[u32],
        shares: &mut [f64],
    ) -> (f64, f64) {
        let (mut mean, mut wrong) = (RowMean::new(rows, w), 0.0);
        let mut n = 0usize;
        for (r, (f, p)) in scores
            .chunks_exact(m)
            .zip(shares.chunks_exact_mut(m))
            .enumerate()
        {
            let top = f.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            for (p, &x) in p.iter_mut().zip(f) {
                *p = (x - top).exp();
            }
            let all: f64 = p.iter().sum();
            p.iter_mut().for_each(|p| *p /= all);
            wrong += (argmax(p) != y[r] as usize) as u8 as f64;
            mean.add(r, || -p[y[r] as usize].max(TINY).ln());
            n += 1;
        }
        (mean.mean(), wrong / n as f64)
    }

    /// The leaf value that replaces the Newton step, from the residuals `y − f` (and weights)
    /// of the rows in a leaf: their weighted median for absolute error; for Huber the median
    /// plus the mean of the residuals' clipped distances to it (Friedman 2001, algorithm 4;
    /// as in scikit-learn's GradientBoostingRegressor, from memory). `None` for the losses
    /// whose Newton step is the leaf value.
    pub fn leaf_value(self, residuals: &mut [(f64, f64)], delta: Option<f64>) -> Option<f64> {
        match self {
            Loss::AbsoluteError => Some(weighted_median(residuals)),
            Loss::Huber { .. } => {
                let d = delta.unwrap_or(f64::INFINITY);
                let m = weighted_median(residuals);
                let (mut s, mut t) = (0.0, 0.0);
                for &(r, w) in residuals.iter() {
                    s += w * sign(r - m) * (r - m).abs().min(d);
                    t += w;
                }
                Some(if t > 0.0 { m + s / t } else { m })
            }
            _ => None,
        }
    }

    /// Turns one row's scores into predictions: class probabilities, the mean count, or the
    /// score itself.
    pub fn predict(self, scores: &[f64], out: &mut Vec<f64>) {
        out.clear();
        match self {
            Loss::Logistic => {
                let p = sigmoid(scores[0]);
                out.extend([1.0 - p, p]);
            }
            Loss::Softmax => out.extend((0..scores.len()).map(|k| softmax_share(scores, k))),
            Loss::Poisson => out.push(scores[0].min(700.0).exp()),
            _ => out.push(scores[0]),
        }
    }
}

fn sign(x: f64) -> f64 {
    if x > 0.0 {
        1.0
    } else if x < 0.0 {
        -1.0
    } else {
        0.0
    }
}

fn sigmoid(x: f64) -> f64 {
    if x >= 0.0 {
        1.0 / (1.0 + (-x).exp())
    } else {
        let e = x.exp();
        e / (1.0 + e)
    }
}

/// A weighted mean of losses, summed in the order they are added (NaN without weight).
#[derive(Default)]
struct WeightedMean {
    sum: f64,
    total: f64,
}

impl WeightedMean {
    #[inline(always)]
    fn add(&mut self, weight: f64, value: f64) {
        self.sum += weight * value;
        self.total += weight;
    }

    fn mean(&self) -> f64 {
        if self.total > 0.0 {
            self.sum / self.total
        } else {
            f64::NAN
        }
    }
}

/// [`Loss::value`]'s weighted mean over `rows` (ascending), for a pass that visits every row
/// in order and adds only these ([`Loss::logistic_pass`], [`Loss::softmax_pass`]); a row's
/// loss is computed only when it is one of them.
struct RowMean<'a> {
    rows: std::iter::Peekable<std::iter::Copied<std::slice::Iter<'a, u32>>>,
    w: Option<&'a [f64]>,
    mean: WeightedMean,
}

impl<'a> RowMean<'a> {
    fn new(rows: &'a [u32], w: Option<&'a [f64]>) -> Self {
        let rows = rows.iter().copied().peekable();
        let mean = WeightedMean::default();
        RowMean { rows, w, mean }
    }

    /// Row `r` (rows come in order) and its loss, when `r` is one of the rows.
    #[inline(always)]
    fn add(&mut self, r: usize, loss: impl FnOnce() -> f64) {
        if self.rows.next_if_eq(&(r as u32)).is_some() {
            self.mean.add(self.w.map_or(1.0, |w| w[r]), loss());
        }
    }

    fn mean(&self) -> f64 {
        self.mean.mean()
    }
}

/// [`Loss::gradients`] of the logistic loss from each row's probability `probs` (kept by
/// [`Loss::logistic_pass`] from the same scores): the same numbers without an exponential.
pub fn logistic_gradients(
    y: &[f64],
    probs: &[f64],
    w: Option<&[f64]>,
    rows: &[u32],
    stats: &mut [f64],
) {
    for &r in rows {
        let r = r as usize;
        let p = probs[r];
        let wt = w.map_or(1.0, |w| w[r]);
        stats[2 * r] = wt * (p - y[r]);
        stats[2 * r + 1] = wt * (p * (1.0 - p));
    }
}

/// [`Loss::gradients`] of the softmax loss for output `k` of `m` from each row's shares
/// `shares` (`m` a row, kept by [`Loss::softmax_pass`] from the same scores): the same numbers
/// without an exponential.
pub fn softmax_gradients(
    y: &[f64],
    shares: &[f64],
    (k, m): (usize, usize),
    w: Option<&[f64]>,
    rows: &[u32],
    stats: &mut [f64],
) {
    let factor = m as f64 / (m as f64 - 1.0).max(1.0);
    for &r in rows {
        let r = r as usize;
        let p = shares[r * m + k];
        let target = (y[r] as usize == k) as u8 as f64;
        let wt = w.map_or(1.0, |w| w[r]);
        stats[2 * r] = wt * (p - target);
        stats[2 * r + 1] = wt * (factor * p * (1.0 - p));
    }
}

/// The softmax share of output `k` (shifted by the largest score, so it never overflows).
fn softmax_share(f: &[f64], k: usize) -> f64 {
    let top = f.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let sum: f64 = f.iter().map(|&x| (x - top).exp()).sum();
    (f[k] - top).exp() / sum
}

/// The weighted median: the smallest value whose cumulative weight reaches half the total
/// (the lower median for an even count of equal weights; common practice, no source).
pub fn weighted_median(pairs: &mut [(f64, f64)]) -> f64 {
    weighted_quantile(pairs, 0.5)
}

/// The smallest value whose cumulative weight reaches `q` of the total (0 when empty).
pub fn weighted_quantile(pairs: &mut [(f64, f64)], q: f64) -> f64 {
    if pairs.is_empty() {
        return 0.0;
    }
    pairs.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
    let total: f64 = pairs.iter().map(|p| p.1).sum();
    let target = q * total;
    let mut acc = 0.0;
    for &(v, w) in pairs.iter() {
        acc += w;
        if acc >= target - 1e-12 * total {
            return v;
        }
    }
    pairs[pairs.len() - 1].0
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Central difference of the loss value in the score of row 0.
    fn numeric_gradient(loss: Loss, y: f64, f: &[f64], k: usize, delta: Option<f64>) -> f64 {
        let m = f.len();
        let eps = 1e-6;
        let (mut up, mut down) = (f.to_vec(), f.to_vec());
        up[k] += eps;
        down[k] -= eps;
        let v = |s: &[f64]| loss.value(&[y], s, None, m, delta, &[0]);
        (v(&up) - v(&down)) / (2.0 * eps)
    }

    #[test]
    fn gradients_are_the_derivatives_of_the_values() {
        // Analytic gradients against central differences (common practice, no source).
        let cases: [(Loss, f64, Vec<f64>); 6] = [
            (Loss::SquaredError, 2.5, vec![0.7]),
            (Loss::AbsoluteError, 2.5, vec![0.7]),
            (Loss::Huber { quantile: 0.9 }, 2.5, vec![0.7]),
            (Loss::Poisson, 3.0, vec![0.4]),
            (Loss::Logistic, 1.0, vec![-0.3]),
            (Loss::Softmax, 2.0, vec![0.1, -0.4, 0.6]),
        ];
        for (loss, y, f) in cases {
            let delta = matches!(loss, Loss::Huber { .. }).then_some(1.0);
            for k in 0..f.len() {
                let mut stats = [0.0; 2];
                loss.gradients(&[y], &f, None, k, f.len(), delta, &[0], &mut stats);
                let numeric = numeric_gradient(loss, y, &f, k, delta);
                assert!(
                    (stats[0] - numeric).abs() < 1e-6,
                    "{loss:?} k={k}: {} vs {numeric}",
                    stats[0]
                );
            }
        }
    }

    #[test]
    fn initial_scores_are_the_best_constants() {
        // Friedman 2001: mean (squared), median (absolute), log-odds (logistic); log of the
        // mean for Poisson's log link.
        let y = [1.0, 2.0, 3.0, 10.0];
        let rows = [0, 1, 2, 3];
        assert_eq!(Loss::SquaredError.initial(&y, None, &rows, 0), [4.0]);
        assert_eq!(Loss::AbsoluteError.initial(&y, None, &rows, 0), [2.0]);
        assert!((Loss::Poisson.initial(&y, None, &rows, 0)[0] - 4f64.ln()).abs() < 1e-12);
        let c = [0.0, 1.0, 1.0, 1.0];
        assert!((Loss::Logistic.initial(&c, None, &rows, 2)[0] - 3f64.ln()).abs() < 1e-12);
        let s = Loss::Softmax.initial(&c, None, &rows, 2);
        assert!((s[1] - s[0] - 3f64.ln()).abs() < 1e-12);
    }

    #[test]
    fn huber_leaves_are_a_median_plus_clipped_mean() {
        // Residuals 0, 1, 2, 100 with δ = 1.5: median (lower) 1; clipped distances
        // −1, 0, 1, 1.5 average 0.375; leaf 1.375 (hand computation).
        let mut r = vec![(0.0, 1.0), (1.0, 1.0), (2.0, 1.0), (100.0, 1.0)];
        let v = Loss::Huber { quantile: 0.9 }.leaf_value(&mut r, Some(1.5));
        assert_eq!(v, Some(1.375));
        assert_eq!(Loss::AbsoluteError.leaf_value(&mut r, None), Some(1.0));
        assert_eq!(Loss::SquaredError.leaf_value(&mut r, None), None);
    }
}
