//! Permutation importance on held-out records: the honest figure for a run judged by
//! holdout, k-fold (repeated or not) or grouped folds. The judging's own splits
//! ([`crate::validate::splits`], same scheme and seed) are refitted one by one through the
//! judging's refit ([`crate::validate::fit_training_part`]: the run's settings and seed,
//! bins learnt from the training part alone), and each fold's model has every predictor
//! (or group of predictors) shuffled within the rows it did not learn from
//! ([`super::importance::permutation`], the same figure and shortcut). The loss of the
//! figure is averaged over folds × shuffles, with its standard deviation over them (Fisher,
//! Rudin & Dominici 2019 define model reliance on held-out data in this way, from memory).
//!
//! Bagging and forests keep Breiman's out-of-bag importance
//! ([`super::importance::out_of_bag`]); runs judged by bootstrap (whose resamples overlap
//! the rows they are judged on) or not judged keep the figure on the training records,
//! marked apparent ([`APPARENT`]).
//!
//! Folds run on a caller's threads through a [`Spread`] (each depends only on its split and
//! the seeds, so any number of threads gives the same result) or one after another.

use crate::design::Design;
use crate::error::{Error, ErrorKind, Result};
use crate::explain::importance::{mean_and_sd, permutation, Metric, Shuffles};
use crate::fit::FitOptions;
use crate::progress::{Flow, Progress, Silent};
use crate::random::{stream, Purpose};
use crate::settings::FitSettings;
use crate::spread::{self, Spread};
use crate::validate::{fit_training_part, splits, Scheme};
use rand_chacha::rand_core::RngCore;

/// How a permutation figure measured on the training records is described.
pub const APPARENT: &str = "on training records (apparent)";

/// Why a scheme gives no held-out records to shuffle in (`None`: it does).
pub fn why_not_held_out(scheme: &Scheme) -> Option<&'static str> {
    match scheme {
        Scheme::Holdout { .. } | Scheme::Folds { .. } | Scheme::Groups { .. } => None,
        Scheme::Bootstrap { .. } => Some(
            "bootstrap resamples share records with the rows they are judged on, so \
             importance stays on the training records (apparent); judge by folds for a \
             held-out figure",
        ),
        Scheme::OutOfBag => Some(
            "out-of-bag judging is for bagging and forests, whose importance is out-of-bag \
             too",
        ),
    }
}

/// Held-out permutation importance of every entry of `groups`.
#[derive(Debug, Clone, PartialEq)]
pub struct HeldOut {
    pub metric: Metric,
    /// The scheme as typed (`folds:5`).
    pub scheme: String,
    /// The seed of the splits (the judging's) and of the shuffles.
    pub split_seed: u64,
    pub seed: u64,
    /// Shuffles per entry and split.
    pub repeats: usize,
    /// The predictors of each entry (one, or a group shuffled together).
    pub groups: Vec<Vec<usize>>,
    /// Per split: the design rows held out, and the figure on them as they are.
    pub held_out_rows: Vec<Vec<usize>>,
    pub baselines: Vec<f64>,
    /// Per entry: the loss of the figure in split `s`, shuffle `r` at `s · repeats + r`
    /// (positive: shuffling hurt).
    pub losses: Vec<Vec<f64>>,
    /// Per entry: mean and standard deviation of `losses` (over splits × shuffles).
    pub mean: Vec<f64>,
    pub spread: Vec<f64>,
}

impl HeldOut {
    /// The splits refitted.
    pub fn splits(&self) -> usize {
        self.baselines.len()
    }

    /// The mean over splits of the figure on their held-out rows as they are.
    pub fn baseline(&self) -> f64 {
        mean_and_sd(&self.baselines).0
    }

    /// Where the figure was measured, in words: "on held-out records, 5 folds".
    pub fn words(&self) -> String {
        let how = match Scheme::parse(&self.scheme) {
            Ok(Scheme::Holdout { fraction }) => {
                format!("one holdout of {:.0}%", 100.0 * fraction)
            }
            Ok(Scheme::Folds { k, repeats: 1 }) => format!("{k} folds"),
            Ok(Scheme::Folds { k, repeats }) => format!("{k} folds × {repeats} repeats"),
            Ok(Scheme::Groups { k, column }) => format!("{k} folds keeping each {column} together"),
            _ => format!("{} splits", self.splits()),
        };
        format!("on held-out records, {how}")
    }
}

/// Refits `settings` on each training part of `scheme`'s splits of `design` (seeded by
/// `split_seed`, as the judging that drew them) and measures the permutation importance of
/// `groups` (indices of the design's predictors) on each part's held-out rows, with
/// `shuffles.repeats` shuffles per split seeded from `shuffles.seed` and the split. Folds
/// are spread over `spread`'s threads when given (each then reports nothing until all are
/// done); otherwise progress through each split's fit and shuffles as one share of the whole
/// ("fold i/n: stage"). May cancel.
#[allow(clippy::too_many_arguments)]
pub fn held_out_permutation(
    design: &Design,
    settings: &FitSettings,
    scheme: &Scheme,
    split_seed: u64,
    groups: &[Vec<usize>],
    shuffles: Shuffles,
    spread: Option<Spread<'_>>,
    progress: &mut dyn Progress,
) -> Result<HeldOut> {
    if let Some(reason) = why_not_held_out(scheme) {
        return Err(Error::new(ErrorKind::BadSetting {
            setting: "held-out importance".into(),
            reason: format!("{}: {reason}", scheme.words()),
        }));
    }
    shuffles.metric.check(matches!(
        design.outcome,
        crate::design::Outcome::Classes { .. }
    ))?;
    let repeats = shuffles.repeats.max(1);
    let s = splits(design, scheme, split_seed)?;
    let count = s.len();
    // Split i's shuffles have their own seed, so no two splits share row orders.
    let shuffles_of = |i: usize| Shuffles {
        repeats,
        seed: stream(shuffles.seed, Purpose::HeldOutPermutation, i as u64).next_u64(),
        ..shuffles
    };
    let job = |i: usize, progress: &mut dyn Progress| {
        let split = &s[i];
        let test = design.select_rows(&split.test);
        let train = design.select_rows(&split.train);
        let mut part = Part {
            outer: progress,
            index: i,
            count,
            phase: 0,
        };
        let (fitted, records) =
            fit_training_part(train, &test, settings, FitOptions::default(), &mut part)?;
        part.phase = 1;
        permutation(
            &fitted.model,
            &records,
            &test.outcome,
            groups,
            shuffles_of(i),
            &mut part,
        )
    };
    let stop = || Error::new(ErrorKind::Cancelled);
    let per_split = match spread {
        Some(spread) => {
            if progress.step("folds", 0, count as u64) == Flow::Stop {
                return Err(stop());
            }
            let done = spread::map(Some(spread), count, |i| job(i, &mut Silent));
            progress.step("folds", count as u64, count as u64);
            done.into_iter().collect::<Result<Vec<_>>>()?
        }
        None => {
            let mut done = Vec::with_capacity(count);
            for i in 0..count {
                // On the scale of `Part`'s steps, so a bar moves on evenly.
                if progress.step("folds", 2000 * i as u64, 2000 * count as u64) == Flow::Stop {
                    return Err(stop());
                }
                done.push(job(i, &mut *progress)?);
            }
            progress.step("folds", 2000 * count as u64, 2000 * count as u64);
            done
        }
    };
    let losses: Vec<Vec<f64>> = (0..groups.len())
        .map(|g| {
            per_split
                .iter()
                .flat_map(|p| p.losses[g].iter().copied())
                .collect()
        })
        .collect();
    let (mean, spread) = losses.iter().map(|l| mean_and_sd(l)).unzip();
    Ok(HeldOut {
        metric: shuffles.metric,
        scheme: scheme.words(),
        split_seed,
        seed: shuffles.seed,
        repeats,
        groups: groups.to_vec(),
        held_out_rows: s.into_iter().map(|x| x.test).collect(),
        baselines: per_split.iter().map(|p| p.baseline).collect(),
        losses,
        mean,
        spread,
    })
}

/// Progress of split `index` of `count` as a share of the whole: its fit (phase 0), then
/// its shuffles (phase 1), each a half of the split's share, labelled "fold i/n: stage".
struct Part<'a> {
    outer: &'a mut dyn Progress,
    index: usize,
    count: usize,
    phase: u64,
}

impl Progress for Part<'_> {
    fn step(&mut self, stage: &str, done: u64, total: u64) -> Flow {
        let within = (1000 * done.min(total)).checked_div(total).unwrap_or(0);
        let label = format!("fold {}/{}: {stage}", self.index + 1, self.count);
        let at = (2 * self.index as u64 + self.phase) * 1000 + within;
        self.outer.step(&label, at, 2000 * self.count as u64)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::design_from_csv;
    use crate::explain::importance::permutation;
    use crate::model::Method;
    use crate::progress::StopAfter;
    use crate::random::below;
    use crate::validate::{run_split, Plan};

    /// 400 rows: y depends on a and b (labels of 8% flipped), c and d are pure noise, e is
    /// constant but for two rows (no leaf of 20 rows can split on it).
    fn data() -> Design {
        let mut rng = stream(11, Purpose::TreeRows, 0);
        let mut text = String::from("y,a,b,c,d,e\n");
        for r in 0..400 {
            let x: Vec<f64> = (0..4)
                .map(|_| below(&mut rng, 10_000) as f64 / 10_000.0)
                .collect();
            let flip = below(&mut rng, 100) < 8;
            let y = (x[0] + 0.7 * x[1] > 0.9) != flip;
            let e = u8::from(r < 2);
            text += &format!("{},{},{},{},{},{e}\n", u8::from(y), x[0], x[1], x[2], x[3]);
        }
        design_from_csv(&text, "y", &["a", "b", "c", "d", "e"])
    }

    fn settings(method: Method, sets: &[(&str, &str)]) -> FitSettings {
        let sets: Vec<(String, String)> = sets
            .iter()
            .map(|(k, v)| (k.to_string(), v.to_string()))
            .collect();
        FitSettings::build(method, 5, false, "y", &sets).unwrap()
    }

    fn singles() -> Vec<Vec<usize>> {
        (0..5).map(|j| vec![j]).collect()
    }

    fn shuffles(repeats: usize) -> Shuffles {
        Shuffles {
            metric: Metric::Auc,
            repeats,
            seed: 1,
        }
    }

    #[test]
    fn each_fold_is_the_judgings_refit_shuffled_within_its_held_out_rows() {
        // By hand: the judging's own splits and fits (validate::run_split gives the fold's
        // predictions), then permutation importance of that fold model on its test rows.
        let d = data();
        let s = settings(Method::Boosting, &[("rounds", "30"), ("seed", "4")]);
        let scheme = Scheme::parse("folds:4").unwrap();
        let got = held_out_permutation(
            &d,
            &s,
            &scheme,
            7,
            &singles(),
            shuffles(3),
            None,
            &mut Silent,
        )
        .unwrap();
        assert_eq!((got.splits(), got.losses[0].len()), (4, 12));
        let plan = Plan {
            scheme: scheme.clone(),
            seed: 7,
            threshold: 0.5,
            resamples: 0,
            baseline: false,
        };
        let all = splits(&d, &scheme, 7).unwrap();
        for (i, split) in all.iter().enumerate() {
            assert_eq!(got.held_out_rows[i], split.test);
            let test = d.select_rows(&split.test);
            let (fitted, records) = fit_training_part(
                d.select_rows(&split.train),
                &test,
                &s,
                FitOptions::default(),
                &mut Silent,
            )
            .unwrap();
            // The same model the judging fitted: the same held-out predictions.
            let judged =
                run_split(&d, &s, &plan, split, FitOptions::default(), &mut Silent).unwrap();
            let k = fitted.model.outputs();
            let mut mine = vec![0.0; records.rows * k];
            for (r, o) in mine.chunks_exact_mut(k).enumerate() {
                fitted
                    .model
                    .predict(crate::tree::Rows::Records(&records), r, o);
            }
            assert_eq!(mine, judged.predictions, "fold {i}");
            // (Permutation sums leaves in fixed point: equal to the last bits or so.)
            assert!(
                (judged.figures["auc"] - got.baselines[i]).abs() < 1e-12,
                "fold {i}"
            );
            let p = permutation(
                &fitted.model,
                &records,
                &test.outcome,
                &singles(),
                Shuffles {
                    seed: stream(1, Purpose::HeldOutPermutation, i as u64).next_u64(),
                    ..shuffles(3)
                },
                &mut Silent,
            )
            .unwrap();
            for g in 0..5 {
                assert_eq!(
                    got.losses[g][i * 3..(i + 1) * 3],
                    p.losses[g][..],
                    "fold {i}"
                );
            }
        }
        let (m, sd) = mean_and_sd(&got.losses[0]);
        assert_eq!((got.mean[0], got.spread[0]), (m, sd));
        assert_eq!(got.words(), "on held-out records, 4 folds");
    }

    #[test]
    fn any_spread_of_the_folds_gives_the_same_figures() {
        let d = data();
        let s = settings(Method::Boosting, &[("rounds", "20")]);
        let scheme = Scheme::parse("folds:3:2").unwrap();
        let run = |spread: Option<Spread<'_>>| {
            held_out_permutation(
                &d,
                &s,
                &scheme,
                2,
                &[vec![0, 1], vec![2], vec![3], vec![4]],
                shuffles(2),
                spread,
                &mut Silent,
            )
            .unwrap()
        };
        let backwards = |count: usize, job: &(dyn Fn(usize) + Sync)| {
            (0..count).rev().for_each(job);
        };
        let in_order = run(None);
        assert_eq!(in_order.splits(), 6);
        assert_eq!(run(Some(&backwards)), in_order);
    }

    #[test]
    fn noise_is_near_zero_held_out_while_a_deep_tree_leans_on_it_on_its_training_rows() {
        // Definitional (Breiman 2001; Fisher, Rudin & Dominici 2019): a predictor no fold
        // model splits on cannot move a prediction, so its importance is exactly 0; a pure
        // noise predictor cannot help on rows the model did not learn from, so its held-out
        // importance is near 0 (within its spread), while a fully grown tree memorises its
        // training rows with it and the apparent figure is clearly positive.
        let d = data();
        let tree = settings(Method::Tree, &[]);
        let held = held_out_permutation(
            &d,
            &tree,
            &Scheme::parse("folds:5").unwrap(),
            3,
            &singles(),
            shuffles(5),
            None,
            &mut Silent,
        )
        .unwrap();
        let fitted =
            crate::fit::fit_design(d.clone(), &tree, None, FitOptions::default(), &mut Silent)
                .unwrap();
        let records = crate::validate::records_of(&d, &fitted.binned.columns);
        let apparent = permutation(
            &fitted.model,
            &records,
            &d.outcome,
            &singles(),
            shuffles(5),
            &mut Silent,
        )
        .unwrap();
        for j in [2, 3] {
            let se = held.spread[j] / (held.losses[j].len() as f64).sqrt();
            assert!(
                held.mean[j].abs() < 3.0 * se + 0.005,
                "noise {j}: held out {} ± {}",
                held.mean[j],
                held.spread[j]
            );
            assert!(
                apparent.mean[j] > 0.01 && apparent.mean[j] > held.mean[j] + 0.01,
                "noise {j}: apparent {} vs held out {}",
                apparent.mean[j],
                held.mean[j]
            );
        }
        // The drivers matter on held-out rows.
        assert!(held.mean[0] > 0.1 && held.mean[1] > 0.02, "{:?}", held.mean);
        // Boosting with leaves of at least 20 rows cannot split e (two rows differ).
        let boost = settings(Method::Boosting, &[("rounds", "20"), ("leaf_size", "20")]);
        let b = held_out_permutation(
            &d,
            &boost,
            &Scheme::parse("holdout:0.3").unwrap(),
            3,
            &singles(),
            shuffles(4),
            None,
            &mut Silent,
        )
        .unwrap();
        assert_eq!(b.splits(), 1);
        assert!(b.losses[4].iter().all(|&l| l == 0.0), "{:?}", b.losses[4]);
        assert_eq!(b.words(), "on held-out records, one holdout of 30%");
    }

    #[test]
    fn bootstrap_and_out_of_bag_are_refused_and_a_stop_cancels() {
        let d = data();
        let s = settings(Method::Tree, &[]);
        for scheme in ["bootstrap:10", "oob"] {
            let e = held_out_permutation(
                &d,
                &s,
                &Scheme::parse(scheme).unwrap(),
                1,
                &singles(),
                shuffles(1),
                None,
                &mut Silent,
            )
            .unwrap_err();
            assert!(e.to_string().contains(scheme), "{e}");
        }
        let e = held_out_permutation(
            &d,
            &s,
            &Scheme::parse("folds:5").unwrap(),
            1,
            &singles(),
            shuffles(1),
            None,
            &mut StopAfter(2),
        )
        .unwrap_err();
        assert!(matches!(e.kind(), ErrorKind::Cancelled));
        // Without a stop, one bar over every split's fit and shuffles: never back, one total.
        struct Seen(Vec<(String, u64, u64)>);
        impl Progress for Seen {
            fn step(&mut self, stage: &str, done: u64, total: u64) -> Flow {
                self.0.push((stage.to_string(), done, total));
                Flow::Continue
            }
        }
        let mut seen = Seen(Vec::new());
        held_out_permutation(
            &d,
            &settings(Method::Boosting, &[("rounds", "5")]),
            &Scheme::parse("folds:3").unwrap(),
            1,
            &singles(),
            shuffles(1),
            None,
            &mut seen,
        )
        .unwrap();
        assert!(seen.0.windows(2).all(|w| w[0].1 <= w[1].1), "{:?}", seen.0);
        assert!(seen.0.iter().all(|x| x.2 == 6000));
        assert_eq!(seen.0.last().unwrap().1, 6000);
        assert!(seen.0.iter().any(|x| x.0.starts_with("fold 3/3: ")));
    }
}
