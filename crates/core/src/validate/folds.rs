//! Validation schemes and the splits they make: which rows each fit trains on and which it
//! is judged on. Every split is drawn from seeded streams (`Purpose::FoldRows`,
//! `Purpose::ValidationResample`), so the same seed gives the same folds on any machine.
//!
//! - k-fold (stratified): each class's rows, shuffled, are dealt round the folds in turn,
//!   the dealing carrying on from class to class, so every fold holds ⌊n_c/k⌋ or ⌈n_c/k⌉ rows
//!   of class c and the fold sizes differ by at most one (the guarantee of scikit-learn's
//!   StratifiedKFold). Numbers (regression) are one stratum.
//! - holdout: round(fraction · n_c) rows of each class (at least one, and at least one left
//!   for training) are held out.
//! - grouped k-fold: all rows of a group in one fold. Groups, largest first (ties in a
//!   seeded random order), go one by one to the fold where they best fill each class's share
//!   (the fold minimising Σ_c g_c (f_c − t_c) / t_c, with g_c the group's rows of class c,
//!   f_c the fold's so far and t_c = n_c / k its share); a greedy rule in the spirit of
//!   scikit-learn's StratifiedGroupKFold (common practice, no source for this exact cost).
//! - bootstrap: resample b draws n rows with replacement; the model is judged on all rows.

use crate::design::{Design, Outcome};
use crate::error::{Error, ErrorKind, Result};
use crate::random::{below, stream, Purpose};

/// How a model is validated.
#[derive(Debug, Clone, PartialEq)]
pub enum Scheme {
    /// Out-of-bag rows of bagging and forests: one fit on every row.
    OutOfBag,
    /// One stratified split, this share of the rows held out.
    Holdout { fraction: f64 },
    /// Stratified k-fold, repeated with fresh shuffles.
    Folds { k: usize, repeats: usize },
    /// Grouped k-fold on the design's groups (from the column named here).
    Groups { k: usize, column: String },
    /// Bootstrap optimism correction (Harrell, Lee & Mark 1996) over this many refits.
    Bootstrap { resamples: usize },
}

fn bad(reason: String) -> Error {
    Error::new(ErrorKind::BadSetting {
        setting: "validate".into(),
        reason,
    })
}

impl Scheme {
    /// Reads `oob`, `holdout:FRACTION`, `folds:K[:REPEATS]`, `groups:K:COLUMN` or
    /// `bootstrap:B`.
    pub fn parse(text: &str) -> Result<Scheme> {
        let parts: Vec<&str> = text.splitn(3, ':').collect();
        let whole = |s: &str, what: &str| -> Result<usize> {
            s.trim().parse::<usize>().map_err(|_| {
                bad(format!(
                    "'{s}' in '{text}' is not a whole number; write the {what} as one, e.g. {}",
                    match what {
                        "number of folds" => "folds:10",
                        "number of repeats" => "folds:10:5",
                        _ => "bootstrap:200",
                    }
                ))
            })
        };
        let scheme = match parts.as_slice() {
            ["oob"] => Scheme::OutOfBag,
            ["holdout", f] => {
                let fraction: f64 = f.trim().parse().map_err(|_| {
                    bad(format!(
                        "'{f}' is not a number; write the share held out, e.g. holdout:0.25"
                    ))
                })?;
                if !(fraction > 0.0 && fraction < 1.0) {
                    return Err(bad(format!(
                        "the holdout fraction {fraction} is outside (0, 1); hold out a share \
                         such as holdout:0.25"
                    )));
                }
                Scheme::Holdout { fraction }
            }
            ["folds", k] => Scheme::Folds {
                k: whole(k, "number of folds")?,
                repeats: 1,
            },
            ["folds", k, r] => Scheme::Folds {
                k: whole(k, "number of folds")?,
                repeats: whole(r, "number of repeats")?,
            },
            ["groups", k, column] if !column.trim().is_empty() => Scheme::Groups {
                k: whole(k, "number of folds")?,
                column: column.trim().to_string(),
            },
            ["bootstrap", b] => Scheme::Bootstrap {
                resamples: whole(b, "number of resamples")?,
            },
            ["groups", ..] => {
                return Err(bad(format!(
                    "'{text}' names no group column; write groups:K:COLUMN, e.g. \
                     groups:5:patient_id (all of one patient's records in one fold)"
                )))
            }
            _ => {
                return Err(bad(format!(
                    "'{text}' is not a scheme; use oob, holdout:FRACTION, folds:K[:REPEATS], \
                     groups:K:COLUMN or bootstrap:B"
                )))
            }
        };
        match scheme {
            Scheme::Folds { k, .. } | Scheme::Groups { k, .. } if k < 2 => Err(bad(format!(
                "{k} fold(s): k-fold needs at least 2 (5 or 10 are usual)"
            ))),
            Scheme::Folds { repeats: 0, .. } => Err(bad(
                "0 repeats: use at least 1 (folds:10:1 is plain 10-fold)".into(),
            )),
            Scheme::Bootstrap { resamples } if resamples < 2 => Err(bad(format!(
                "{resamples} resample(s): bootstrap validation needs at least 2 (200 is usual)"
            ))),
            s => Ok(s),
        }
    }

    /// The scheme as it is typed.
    pub fn words(&self) -> String {
        match self {
            Scheme::OutOfBag => "oob".into(),
            Scheme::Holdout { fraction } => format!("holdout:{fraction}"),
            Scheme::Folds { k, repeats: 1 } => format!("folds:{k}"),
            Scheme::Folds { k, repeats } => format!("folds:{k}:{repeats}"),
            Scheme::Groups { k, column } => format!("groups:{k}:{column}"),
            Scheme::Bootstrap { resamples } => format!("bootstrap:{resamples}"),
        }
    }
}

/// One fit of a validation: the rows it trains on and the rows it predicts (indices into
/// the design's rows).
#[derive(Debug, Clone, PartialEq)]
pub struct Split {
    /// Repeat (k-fold), or resample (bootstrap); 0 otherwise.
    pub repeat: usize,
    /// Fold within the repeat; 0 for a holdout and a bootstrap resample.
    pub fold: usize,
    /// Training rows (a bootstrap sample repeats rows).
    pub train: Vec<usize>,
    /// Rows predicted: the held-out fold, or every row for a bootstrap resample.
    pub test: Vec<usize>,
    /// For each test row, whether the training rows left it out (always, except in a
    /// bootstrap resample, where about 36.8% are).
    pub out_of_sample: Vec<bool>,
}

/// Stratum of each row: its class, or 0 for numbers. Returns the strata and their count.
fn strata(design: &Design) -> (Vec<u32>, usize) {
    match &design.outcome {
        Outcome::Classes { codes, labels } => (codes.clone(), labels.len()),
        Outcome::Numbers(v) => (vec![0; v.len()], 1),
    }
}

fn class_name(design: &Design, c: usize) -> String {
    match &design.outcome {
        Outcome::Classes { labels, .. } => format!("class '{}'", labels[c]),
        Outcome::Numbers(_) => "the rows".into(),
    }
}

fn shuffle(rows: &mut [usize], rng: &mut rand_chacha::ChaCha8Rng) {
    for i in 0..rows.len().saturating_sub(1) {
        let j = i + below(rng, rows.len() - i);
        rows.swap(i, j);
    }
}

/// Rows of each stratum, in row order.
fn rows_by_stratum(strata: &[u32], count: usize) -> Vec<Vec<usize>> {
    let mut by = vec![Vec::new(); count];
    for (r, &s) in strata.iter().enumerate() {
        by[s as usize].push(r);
    }
    by
}

/// The fold (0..k) of every row, stratified, for repeat `repeat`.
pub fn stratified_folds(design: &Design, k: usize, seed: u64, repeat: usize) -> Vec<u32> {
    let (strata, count) = strata(design);
    let mut rng = stream(seed, Purpose::FoldRows, repeat as u64);
    let mut fold = vec![0u32; strata.len()];
    let mut next = 0usize;
    for mut rows in rows_by_stratum(&strata, count) {
        shuffle(&mut rows, &mut rng);
        for r in rows {
            fold[r] = next as u32;
            next = (next + 1) % k;
        }
    }
    fold
}

/// The fold (0..k) of every row, whole groups per fold, classes balanced greedily.
pub fn grouped_folds(design: &Design, k: usize, seed: u64, column: &str) -> Result<Vec<u32>> {
    let Some(groups) = &design.groups else {
        return Err(bad(format!(
            "groups:{k}:{column} needs the group column '{column}' in the design"
        )));
    };
    let (strata, count) = strata(design);
    let n_groups = groups.iter().map(|&g| g as usize + 1).max().unwrap_or(0);
    if n_groups < 2 {
        return Err(bad(format!(
            "the group column '{column}' holds a single group: grouped folds need several \
             groups (patients, sites). Check the column, or use folds:{k}"
        )));
    }
    if n_groups < k {
        return Err(bad(format!(
            "the group column '{column}' holds {n_groups} groups, fewer than {k} folds; use \
             groups:{n_groups}:{column} or fewer"
        )));
    }
    let mut by_group = vec![vec![0usize; count]; n_groups];
    let mut totals = vec![0usize; count];
    for (&g, &s) in groups.iter().zip(&strata) {
        by_group[g as usize][s as usize] += 1;
        totals[s as usize] += 1;
    }
    let mut order: Vec<usize> = (0..n_groups).collect();
    shuffle(&mut order, &mut stream(seed, Purpose::FoldRows, 0));
    let size = |g: usize| by_group[g].iter().sum::<usize>();
    order.sort_by_key(|&g| std::cmp::Reverse(size(g)));
    let share: Vec<f64> = totals
        .iter()
        .map(|&t| (t as f64 / k as f64).max(1e-9))
        .collect();
    let mut fold_counts = vec![vec![0usize; count]; k];
    let mut fold_of_group = vec![0u32; n_groups];
    for g in order {
        let cost = |f: usize| -> f64 {
            (0..count)
                .map(|c| by_group[g][c] as f64 * (fold_counts[f][c] as f64 - share[c]) / share[c])
                .sum()
        };
        let fold_size = |f: usize| fold_counts[f].iter().sum::<usize>();
        let best = (0..k)
            .min_by(|&a, &b| {
                cost(a)
                    .total_cmp(&cost(b))
                    .then(fold_size(a).cmp(&fold_size(b)))
            })
            .unwrap_or(0);
        for c in 0..count {
            fold_counts[best][c] += by_group[g][c];
        }
        fold_of_group[g] = best as u32;
    }
    if matches!(design.outcome, Outcome::Classes { .. }) {
        for (f, counts) in fold_counts.iter().enumerate() {
            if let Some(c) = (0..count).find(|&c| counts[c] == 0 && totals[c] > 0) {
                return Err(bad(format!(
                    "with {k} grouped folds, fold {} holds no rows of {}: its rows sit in too \
                     few groups. Use fewer folds (e.g. groups:{}:{column})",
                    f + 1,
                    class_name(design, c),
                    (k - 1).max(2)
                )));
            }
        }
    }
    Ok(groups.iter().map(|&g| fold_of_group[g as usize]).collect())
}

/// Refuses k folds when some class has fewer than k rows (some test fold would hold none of
/// it, so its AUC and sensitivity would be undefined there).
fn check_k(design: &Design, k: usize) -> Result<()> {
    let n = design.outcome.len();
    if n < k {
        return Err(bad(format!(
            "{n} rows are fewer than {k} folds; use at most folds:{n}"
        )));
    }
    let (strata, count) = strata(design);
    let by = rows_by_stratum(&strata, count);
    if let Some((c, rows)) = by
        .iter()
        .enumerate()
        .filter(|(_, r)| !r.is_empty())
        .min_by_key(|(_, r)| r.len())
    {
        if rows.len() < k && matches!(design.outcome, Outcome::Classes { .. }) {
            return Err(bad(format!(
                "{} has {} row(s), fewer than {k} folds: some folds would hold none of it. \
                 Use folds:{} or fewer",
                class_name(design, c),
                rows.len(),
                rows.len().max(2)
            )));
        }
    }
    Ok(())
}

fn splits_from_folds(fold: &[u32], k: usize, repeat: usize) -> Vec<Split> {
    (0..k)
        .map(|f| {
            let (test, train): (Vec<usize>, Vec<usize>) =
                (0..fold.len()).partition(|&r| fold[r] as usize == f);
            Split {
                repeat,
                fold: f,
                out_of_sample: vec![true; test.len()],
                train,
                test,
            }
        })
        .collect()
}

/// The splits of `scheme` on `design` (none for out-of-bag, which fits once).
pub fn splits(design: &Design, scheme: &Scheme, seed: u64) -> Result<Vec<Split>> {
    let n = design.outcome.len();
    match scheme {
        Scheme::OutOfBag => Ok(Vec::new()),
        Scheme::Folds { k, repeats } => {
            check_k(design, *k)?;
            Ok((0..*repeats)
                .flat_map(|r| splits_from_folds(&stratified_folds(design, *k, seed, r), *k, r))
                .collect())
        }
        Scheme::Groups { k, column } => {
            if n < *k {
                return Err(bad(format!(
                    "{n} rows are fewer than {k} folds; use fewer folds"
                )));
            }
            Ok(splits_from_folds(
                &grouped_folds(design, *k, seed, column)?,
                *k,
                0,
            ))
        }
        Scheme::Holdout { fraction } => {
            let (strata, count) = strata(design);
            let mut rng = stream(seed, Purpose::FoldRows, 0);
            let mut held = vec![false; n];
            for (c, mut rows) in rows_by_stratum(&strata, count).into_iter().enumerate() {
                if rows.is_empty() {
                    continue;
                }
                if rows.len() < 2 {
                    return Err(bad(format!(
                        "{} has a single row: it cannot be both trained on and held out. \
                         Add rows of it, or use folds",
                        class_name(design, c)
                    )));
                }
                shuffle(&mut rows, &mut rng);
                let take =
                    ((fraction * rows.len() as f64).round() as usize).clamp(1, rows.len() - 1);
                for &r in &rows[..take] {
                    held[r] = true;
                }
            }
            let (test, train): (Vec<usize>, Vec<usize>) = (0..n).partition(|&r| held[r]);
            Ok(vec![Split {
                repeat: 0,
                fold: 0,
                out_of_sample: vec![true; test.len()],
                train,
                test,
            }])
        }
        Scheme::Bootstrap { resamples } => Ok((0..*resamples)
            .map(|b| {
                let mut rng = stream(seed, Purpose::ValidationResample, b as u64);
                let mut train: Vec<usize> = (0..n).map(|_| below(&mut rng, n)).collect();
                train.sort_unstable();
                let mut seen = vec![false; n];
                for &r in &train {
                    seen[r] = true;
                }
                Split {
                    repeat: b,
                    fold: 0,
                    out_of_sample: seen.iter().map(|s| !s).collect(),
                    train,
                    test: (0..n).collect(),
                }
            })
            .collect()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::design_from_csv;

    fn classes(n_yes: usize, n_no: usize, groups: bool) -> Design {
        let mut text = String::from("y,x,g\n");
        for i in 0..n_yes + n_no {
            let y = if i < n_yes { "yes" } else { "no" };
            text += &format!("{y},{i},p{}\n", i % 37);
        }
        let mut d = design_from_csv(&text, "y", &["x"]);
        if groups {
            d.groups = Some((0..n_yes + n_no).map(|i| (i % 37) as u32).collect());
        }
        d
    }

    fn class_counts(d: &Design, rows: &[usize]) -> [usize; 2] {
        let Outcome::Classes { codes, .. } = &d.outcome else {
            panic!()
        };
        let mut c = [0; 2];
        for &r in rows {
            c[codes[r] as usize] += 1;
        }
        c
    }

    #[test]
    fn stratified_folds_keep_each_class_within_one_row_of_its_share() {
        // The guarantee of scikit-learn's StratifiedKFold (per-class counts ⌊n_c/k⌋ or ⌈n_c/k⌉).
        let d = classes(23, 101, false);
        let s = splits(&d, &Scheme::Folds { k: 5, repeats: 2 }, 3).unwrap();
        assert_eq!(s.len(), 10);
        for split in &s {
            let c = class_counts(&d, &split.test);
            assert!(
                (4..=5).contains(&c[1]) && (20..=21).contains(&c[0]),
                "{c:?}"
            );
            assert_eq!(split.train.len() + split.test.len(), 124);
        }
        // Every row is tested exactly once per repeat.
        for r in 0..2 {
            let mut tested: Vec<usize> = s
                .iter()
                .filter(|x| x.repeat == r)
                .flat_map(|x| x.test.clone())
                .collect();
            tested.sort_unstable();
            assert_eq!(tested, (0..124).collect::<Vec<_>>());
        }
        assert_ne!(s[0].test, s[5].test, "repeats reshuffle");
        assert_eq!(
            s,
            splits(&d, &Scheme::Folds { k: 5, repeats: 2 }, 3).unwrap()
        );
    }

    #[test]
    fn grouped_folds_never_split_a_group_and_balance_classes() {
        let d = classes(60, 200, true);
        let s = splits(
            &d,
            &Scheme::Groups {
                k: 5,
                column: "g".into(),
            },
            1,
        )
        .unwrap();
        let groups = d.groups.as_ref().unwrap();
        let mut fold_of = std::collections::HashMap::new();
        for split in &s {
            for &r in &split.test {
                assert_eq!(*fold_of.entry(groups[r]).or_insert(split.fold), split.fold);
            }
            let c = class_counts(&d, &split.test);
            assert!(c[1] >= 8 && c[1] <= 16, "events per fold {c:?}");
        }
    }

    #[test]
    fn holdout_is_stratified_and_bad_schemes_are_refused() {
        let d = classes(40, 160, false);
        let s = splits(&d, &Scheme::Holdout { fraction: 0.25 }, 9).unwrap();
        assert_eq!(class_counts(&d, &s[0].test), [40, 10]);
        let err = |t: &str| Scheme::parse(t).unwrap_err().to_string();
        assert!(err("holdout:1.5").contains("outside (0, 1)"));
        assert!(err("folds:1").contains("at least 2"));
        assert!(err("folds:x").contains("not a whole number"));
        assert!(err("leave-one-out").contains("not a scheme"));
        assert!(err("groups:5").contains("names no group column"));
        assert!(err("groups:5: ").contains("groups:K:COLUMN"));
        let few = classes(3, 50, false);
        let e = splits(&few, &Scheme::Folds { k: 5, repeats: 1 }, 1).unwrap_err();
        assert!(e.to_string().contains("class 'yes' has 3 row(s)"), "{e}");
        let tiny = classes(2, 2, false);
        let e = splits(&tiny, &Scheme::Folds { k: 10, repeats: 1 }, 1).unwrap_err();
        assert!(e.to_string().contains("fewer than 10 folds"), "{e}");
        let mut one = classes(10, 10, true);
        one.groups = Some(vec![0; 20]);
        let e = splits(
            &one,
            &Scheme::Groups {
                k: 2,
                column: "g".into(),
            },
            1,
        )
        .unwrap_err();
        assert!(e.to_string().contains("single group"), "{e}");
    }

    #[test]
    fn a_bootstrap_resample_leaves_about_a_third_out() {
        let d = classes(100, 900, false);
        let s = splits(&d, &Scheme::Bootstrap { resamples: 3 }, 5).unwrap();
        for split in &s {
            let out = split.out_of_sample.iter().filter(|&&o| o).count() as f64 / 1000.0;
            assert!((out - 0.368).abs() < 0.05, "{out}");
        }
    }
}
