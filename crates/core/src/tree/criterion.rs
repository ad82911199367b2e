//! Split criteria, computed from summed per-row statistics.
//!
//! Classification rows carry one weight per class (the row's weight in its own class, zero in
//! the others); regression rows carry `(w, w·y)`; gradient-boosting rows carry `(g, h)`, the
//! first and second derivatives of some loss at the row's current score (the grower never
//! learns which loss). A node's *cost* is its weight times its impurity, so a split's gain is
//! `cost(parent) − cost(left) − cost(right)` (Breiman, Friedman, Olshen & Stone 1984, ch. 4).
//! For `(g, h)` the cost is twice the loss change of a Newton step with an L2 penalty λ on the
//! leaf value, `−G²/(H + λ)`, and the leaf value is `−G/(H + λ)` (Chen & Guestrin 2016,
//! XGBoost, eqs. 5–7; the factor ½ is dropped, which leaves every comparison unchanged).

/// How node impurity is measured.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Criterion {
    /// Gini impurity 1 − Σ p².
    Gini,
    /// Entropy −Σ p log₂ p.
    Entropy,
    /// Squared error about the node mean (regression).
    SquaredError,
    /// Summed gradients and hessians `(G, H)` with an L2 penalty `l2` on leaf values.
    Gradient { l2: f64 },
}

impl Criterion {
    /// Statistics per row: `classes` for classification, 2 for regression.
    pub fn width(self, classes: usize) -> usize {
        match self {
            Criterion::SquaredError | Criterion::Gradient { .. } => 2,
            _ => classes,
        }
    }

    /// Output values per node: one for squared error and gradients, one per class otherwise.
    pub fn outputs(self, width: usize) -> usize {
        match self {
            Criterion::SquaredError | Criterion::Gradient { .. } => 1,
            _ => width,
        }
    }

    /// Cost of a node whose value is held at `value` (a bound of a monotone constraint)
    /// instead of its best value: `2·G·v + (H + λ)·v²`, which is `−G²/(H + λ)` at the best
    /// value `v = −G/(H + λ)` (gradients only; other criteria ignore `value`).
    #[inline(always)]
    pub fn cost_at(self, s: &[f64], value: f64) -> f64 {
        match self {
            Criterion::Gradient { l2 } => 2.0 * s[0] * value + (s[1] + l2) * value * value,
            _ => self.cost(s),
        }
    }

    /// Weight times impurity of a node with summed statistics `s`. For squared error the
    /// part that does not depend on the split (Σ w·y²) is left out: `−(Σ w·y)² / Σ w`.
    #[inline(always)]
    pub fn cost(self, s: &[f64]) -> f64 {
        match self {
            Criterion::SquaredError => {
                if s[0] <= 0.0 {
                    0.0
                } else {
                    -(s[1] * s[1]) / s[0]
                }
            }
            Criterion::Gini => {
                let w: f64 = s.iter().sum();
                if w <= 0.0 {
                    return 0.0;
                }
                w - s.iter().map(|c| c * c).sum::<f64>() / w
            }
            Criterion::Gradient { l2 } => {
                let d = s[1] + l2;
                if d <= 0.0 {
                    0.0
                } else {
                    -(s[0] * s[0]) / d
                }
            }
            Criterion::Entropy => {
                let w: f64 = s.iter().sum();
                if w <= 0.0 {
                    return 0.0;
                }
                -s.iter()
                    .filter(|&&c| c > 0.0)
                    .map(|&c| c * (c / w).log2())
                    .sum::<f64>()
            }
        }
    }

    /// [`Criterion::cost`] of two statistics `[a, b]`, written out so a split scan needs no
    /// slice: the same operations in the same order, so the same number to the last bit.
    #[inline(always)]
    pub fn cost2(self, a: f64, b: f64) -> f64 {
        match self {
            // Each computed whatever the guard says and then chosen, so a loop over split
            // points has no branch and vectorises (a division by zero is no error here).
            Criterion::Gini => {
                let w = a + b;
                let c = w - (a * a + b * b) / w;
                if w <= 0.0 {
                    0.0
                } else {
                    c
                }
            }
            Criterion::SquaredError => {
                let c = -(b * b) / a;
                if a <= 0.0 {
                    0.0
                } else {
                    c
                }
            }
            Criterion::Gradient { l2 } => {
                let d = b + l2;
                let c = -(a * a) / d;
                if d <= 0.0 {
                    0.0
                } else {
                    c
                }
            }
            Criterion::Entropy => self.cost(&[a, b]),
        }
    }

    /// [`Criterion::weight`] of two statistics `[a, b]`.
    #[inline(always)]
    pub fn weight2(self, a: f64, b: f64) -> f64 {
        match self {
            Criterion::SquaredError => a,
            Criterion::Gradient { .. } => b,
            _ => a + b,
        }
    }

    /// Total weight of a node (for gradients: the summed hessian).
    #[inline(always)]
    pub fn weight(self, s: &[f64]) -> f64 {
        match self {
            Criterion::SquaredError => s[0],
            Criterion::Gradient { .. } => s[1],
            _ => s.iter().sum(),
        }
    }

    /// A node's output values: class probabilities, or the weighted mean.
    pub fn values(self, s: &[f64], out: &mut Vec<f64>) {
        match self {
            Criterion::SquaredError => out.push(if s[0] > 0.0 { s[1] / s[0] } else { 0.0 }),
            Criterion::Gradient { .. } => out.push(self.leaf_value(s)),
            _ => {
                let w: f64 = s.iter().sum();
                out.extend(s.iter().map(|c| if w > 0.0 { c / w } else { 0.0 }));
            }
        }
    }

    /// The single output value of a node (squared error: the mean; gradients: the Newton
    /// step `−G/(H + λ)`); for classes the share of the last class.
    #[inline(always)]
    pub fn leaf_value(self, s: &[f64]) -> f64 {
        match self {
            Criterion::Gradient { l2 } => {
                let d = s[1] + l2;
                if d > 0.0 {
                    -s[0] / d
                } else {
                    0.0
                }
            }
            Criterion::SquaredError => {
                if s[0] > 0.0 {
                    s[1] / s[0]
                } else {
                    0.0
                }
            }
            _ => {
                let w: f64 = s.iter().sum();
                if w > 0.0 {
                    s[s.len() - 1] / w
                } else {
                    0.0
                }
            }
        }
    }

    /// The number a category bin is ordered by before scanning its splits: the share of
    /// class 1 (two classes), the mean (regression) or the Newton step (gradients, the
    /// ordering LightGBM uses for categories, from memory); `None` with more than two classes.
    pub fn order_key(self, s: &[f64]) -> Option<f64> {
        match self {
            Criterion::Gradient { .. } => Some(self.leaf_value(s)),
            Criterion::SquaredError => Some(if s[0] > 0.0 { s[1] / s[0] } else { 0.0 }),
            _ if s.len() == 2 => {
                let w = s[0] + s[1];
                Some(if w > 0.0 { s[1] / w } else { 0.0 })
            }
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    #[test]
    fn the_written_out_two_statistic_cost_is_the_cost_to_the_bit() {
        // Identity of two ways of computing one formula (no outside source needed).
        let mut x = 0x9E37_79B9_7F4A_7C15u64;
        let mut next = || {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            match x % 5 {
                0 => 0.0,
                1 => (x % 7) as f64,
                _ => {
                    (x >> 11) as f64 / (1u64 << 40) as f64
                        - 1000.0 * (x.is_multiple_of(3) as u8 as f64)
                }
            }
        };
        for c in [
            Criterion::Gini,
            Criterion::Entropy,
            Criterion::SquaredError,
            Criterion::Gradient { l2: 0.0 },
            Criterion::Gradient { l2: 1.5 },
        ] {
            for _ in 0..10_000 {
                let (a, b) = (next(), next());
                let (a, b) = if matches!(c, Criterion::Gini | Criterion::Entropy) {
                    (a.abs(), b.abs())
                } else {
                    (a, b)
                };
                assert_eq!(
                    c.cost2(a, b).to_bits(),
                    c.cost(&[a, b]).to_bits(),
                    "{c:?} {a} {b}"
                );
                assert_eq!(c.weight2(a, b).to_bits(), c.weight(&[a, b]).to_bits());
            }
        }
    }

    use super::*;

    #[test]
    fn costs_match_hand_values() {
        // Gini of (3, 1): 4 · (1 − (0.75² + 0.25²)) = 1.5 (textbook definition).
        assert!((Criterion::Gini.cost(&[3.0, 1.0]) - 1.5).abs() < 1e-12);
        // Entropy of (2, 2): 4 · 1 bit = 4.
        assert!((Criterion::Entropy.cost(&[2.0, 2.0]) - 4.0).abs() < 1e-12);
        // y = 1, 3 (w = 1 each): Σwy² − (Σwy)²/Σw = 10 − 8 = 2; without the constant: −8.
        assert!((Criterion::SquaredError.cost(&[2.0, 4.0]) + 8.0).abs() < 1e-12);
        assert_eq!(Criterion::Gini.cost(&[5.0, 0.0]), 0.0);
        // Gradients G = −4, H = 3, λ = 1: cost −16/4 = −4, leaf 4/4 = 1; held at 0.5 the cost
        // is 2·(−4)·0.5 + 4·0.25 = −3, worse than at the best value (hand computation).
        let g = Criterion::Gradient { l2: 1.0 };
        assert!((g.cost(&[-4.0, 3.0]) + 4.0).abs() < 1e-12);
        assert!((g.leaf_value(&[-4.0, 3.0]) - 1.0).abs() < 1e-12);
        assert!((g.cost_at(&[-4.0, 3.0], 1.0) - g.cost(&[-4.0, 3.0])).abs() < 1e-12);
        assert!((g.cost_at(&[-4.0, 3.0], 0.5) + 3.0).abs() < 1e-12);
    }
}
