//! Split criteria, computed from summed per-row statistics.
//!
//! Classification rows carry one weight per class (the row's weight in its own class, zero in
//! the others); regression rows carry `(w, w·y)`. A node's *cost* is its weight times its
//! impurity, so a split's gain is `cost(parent) − cost(left) − cost(right)`
//! (Breiman, Friedman, Olshen & Stone 1984, ch. 4).

/// How node impurity is measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Criterion {
    /// Gini impurity 1 − Σ p².
    Gini,
    /// Entropy −Σ p log₂ p.
    Entropy,
    /// Squared error about the node mean (regression).
    SquaredError,
}

impl Criterion {
    /// Statistics per row: `classes` for classification, 2 for regression.
    pub fn width(self, classes: usize) -> usize {
        match self {
            Criterion::SquaredError => 2,
            _ => classes,
        }
    }

    /// Weight times impurity of a node with summed statistics `s`. For squared error the
    /// part that does not depend on the split (Σ w·y²) is left out: `−(Σ w·y)² / Σ w`.
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

    /// Total weight of a node.
    pub fn weight(self, s: &[f64]) -> f64 {
        match self {
            Criterion::SquaredError => s[0],
            _ => s.iter().sum(),
        }
    }

    /// A node's output values: class probabilities, or the weighted mean.
    pub fn values(self, s: &[f64], out: &mut Vec<f64>) {
        match self {
            Criterion::SquaredError => out.push(if s[0] > 0.0 { s[1] / s[0] } else { 0.0 }),
            _ => {
                let w: f64 = s.iter().sum();
                out.extend(s.iter().map(|c| if w > 0.0 { c / w } else { 0.0 }));
            }
        }
    }

    /// The number a category bin is ordered by before scanning its splits: the share of
    /// class 1 (two classes) or the mean (regression); `None` with more than two classes.
    pub fn order_key(self, s: &[f64]) -> Option<f64> {
        match self {
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
    }
}
