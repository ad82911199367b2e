//! AdaBoost, multi-class SAMME (Zhu, Zou, Rosset & Hastie 2009), which for two classes is
//! discrete AdaBoost (Freund & Schapire 1997). Each round grows a tree (a stump by default)
//! on the current row weights, measures its weighted error ε, gives it the weight
//! α = learning_rate · (ln((1 − ε)/ε) + ln(K − 1)), multiplies the weights of the rows it
//! got wrong by e^α and normalises. Stops early when a round is perfect (ε = 0) or no
//! better than chance (ε ≥ 1 − 1/K), and says which.

use crate::binning::BinnedMatrix;
use crate::ensemble::forest::argmax;
use crate::progress::{Flow, Progress};
use crate::tree::criterion::Criterion;
use crate::tree::grower::{grow, GrowSettings};
use crate::tree::{walk, Rows, Tree};

#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BoostSettings {
    pub rounds: usize,
    pub learning_rate: f64,
    /// The base trees (depth 1 by default: stumps).
    pub grow: GrowSettings,
}

impl Default for BoostSettings {
    fn default() -> Self {
        BoostSettings {
            rounds: 50,
            learning_rate: 1.0,
            grow: GrowSettings {
                criterion: Criterion::Gini,
                max_depth: Some(1),
                ..GrowSettings::default()
            },
        }
    }
}

/// Why boosting stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stop {
    AllRounds,
    /// A round classified every training row correctly.
    Perfect,
    /// A round was no better than guessing (ε ≥ 1 − 1/K).
    NoBetterThanChance,
    Cancelled,
}

impl Stop {
    /// Why it stopped, in words for people.
    pub fn words(self) -> &'static str {
        match self {
            Stop::AllRounds => "ran every round",
            Stop::Perfect => "stopped early: a round classified every training row correctly",
            Stop::NoBetterThanChance => "stopped early: a round was no better than chance",
            Stop::Cancelled => "cancelled before the last round",
        }
    }
}

#[derive(Debug, Clone)]
pub struct AdaBoost {
    pub trees: Vec<Tree>,
    /// α of each round.
    pub alphas: Vec<f64>,
    /// Weighted training error ε of each round (weights normalised to sum 1).
    pub errors: Vec<f64>,
    pub classes: usize,
    pub stop: Stop,
}

impl AdaBoost {
    /// Class scores of row `row` after `rounds` rounds: Σ α over the rounds voting for each
    /// class.
    pub fn scores(&self, rows: Rows<'_>, row: usize, rounds: usize) -> Vec<f64> {
        let mut s = vec![0.0; self.classes];
        for (t, a) in self.trees.iter().zip(&self.alphas).take(rounds) {
            s[argmax(t.predict(rows, row))] += a;
        }
        s
    }
}

/// Fits AdaBoost on classes `codes` (0..classes) with optional initial row weights.
pub fn fit_adaboost(
    binned: &BinnedMatrix,
    codes: &[u32],
    classes: usize,
    weights: Option<&[f64]>,
    settings: &BoostSettings,
    progress: &mut dyn Progress,
) -> AdaBoost {
    let n = binned.rows;
    let mut w: Vec<f64> = match weights {
        Some(w) => w.to_vec(),
        None => vec![1.0 / n as f64; n],
    };
    let total: f64 = w.iter().sum();
    w.iter_mut().for_each(|x| *x /= total);
    let rows: Vec<u32> = (0..n as u32).collect();
    let mut at = vec![0; n];
    let mut model = AdaBoost {
        trees: Vec::new(),
        alphas: Vec::new(),
        errors: Vec::new(),
        classes,
        stop: Stop::AllRounds,
    };
    let k = classes as f64;
    let mut stats = vec![0.0; n * classes];
    for round in 0..settings.rounds {
        stats.iter_mut().for_each(|s| *s = 0.0);
        for r in 0..n {
            stats[r * classes + codes[r] as usize] = w[r];
        }
        let tree = grow(binned, &stats, classes, &rows, &settings.grow, None);
        // Every row's leaf, the rows routed down the tree together (the leaves `Tree::leaf`
        // finds row by row).
        walk::leaves(&tree, Rows::Binned(binned), |i| i, &mut at);
        let wrong: Vec<bool> = at
            .iter()
            .zip(codes)
            .map(|(&leaf, &c)| argmax(tree.node_values(leaf as usize)) != c as usize)
            .collect();
        let sum_w: f64 = w.iter().sum();
        let error: f64 = (0..n).filter(|&r| wrong[r]).map(|r| w[r]).sum::<f64>() / sum_w;
        if error <= 0.0 {
            model.trees.push(tree);
            model.alphas.push(1.0);
            model.errors.push(0.0);
            model.stop = Stop::Perfect;
            break;
        }
        if error >= 1.0 - 1.0 / k {
            model.stop = Stop::NoBetterThanChance;
            break;
        }
        let alpha = settings.learning_rate * (((1.0 - error) / error).ln() + (k - 1.0).ln());
        model.trees.push(tree);
        model.alphas.push(alpha);
        model.errors.push(error);
        if round + 1 < settings.rounds {
            for r in 0..n {
                if wrong[r] {
                    w[r] *= alpha.exp();
                }
            }
            let s: f64 = w.iter().sum();
            w.iter_mut().for_each(|x| *x /= s);
        }
        if progress.step("rounds", round as u64 + 1, settings.rounds as u64) == Flow::Stop {
            model.stop = Stop::Cancelled;
            break;
        }
    }
    model
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::binning::{bin_design, BinSettings};
    use crate::design::{design_from_csv, Outcome};
    use crate::progress::Silent;
    use crate::random::{below, stream, Purpose};

    #[test]
    fn training_error_stays_under_freund_and_schapires_bound() {
        // Freund & Schapire (1997): two-class training error ≤ Π 2√(ε_t(1 − ε_t)).
        let mut rng = stream(5, Purpose::TreeRows, 0);
        let mut text = String::from("y,a,b\n");
        for _ in 0..300 {
            let (a, b) = (below(&mut rng, 1000) as f64, below(&mut rng, 1000) as f64);
            let y = if (a - 500.0).powi(2) + (b - 500.0).powi(2) < 300.0f64.powi(2) {
                "in"
            } else {
                "out"
            };
            text += &format!("{y},{a},{b}\n");
        }
        let design = design_from_csv(&text, "y", &["a", "b"]);
        let m = bin_design(&design, BinSettings::default()).unwrap();
        let Outcome::Classes { codes, .. } = &design.outcome else {
            panic!()
        };
        let model = fit_adaboost(
            &m,
            codes,
            2,
            None,
            &BoostSettings {
                rounds: 40,
                ..BoostSettings::default()
            },
            &mut Silent,
        );
        let mut bound = 1.0;
        for (t, e) in model.errors.iter().enumerate() {
            bound *= 2.0 * (e * (1.0 - e)).sqrt();
            let wrong = (0..m.rows)
                .filter(|&r| argmax(&model.scores(Rows::Binned(&m), r, t + 1)) != codes[r] as usize)
                .count();
            let err = wrong as f64 / m.rows as f64;
            assert!(
                err <= bound + 1e-12,
                "round {t}: error {err} above bound {bound}"
            );
        }
        assert!(model.errors.len() == 40 && model.stop == Stop::AllRounds);
    }
}
