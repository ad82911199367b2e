//! What validation figures cannot show, computed from the data and the scheme: a predictor
//! that alone separates the classes, or one class from the rest, or follows a number outcome
//! almost exactly (possible leakage), an identifier among the predictors,
//! too few events for the number of predictors, class imbalance, and grouped records
//! validated as if independent.

use crate::data::{summary::looks_like_id_name, Table, MISSING_CODE};
use crate::design::{Design, Outcome, PredictorValues};
use crate::metrics::binary::{auc, auc_in_order};
use crate::metrics::order_by;
use crate::metrics::sample_size::{events_per_predictor, rows_for_overall_risk};

use super::Scheme;

/// A single predictor's AUC above which it is suspected of leaking the outcome (the level
/// the tracker's issue names; common practice, no source). Several classes: the largest
/// one-vs-rest AUC over the classes.
pub const LEAKAGE_AUC: f64 = 0.98;
/// Numbers: a single predictor's |Spearman correlation| with the outcome above which it is
/// suspected of leaking it (the regression analogue of [`LEAKAGE_AUC`]; common practice, no
/// source).
pub const LEAKAGE_SPEARMAN: f64 = 0.98;
/// Events per predictor parameter below which a model is likely to overfit (Peduzzi et al.
/// 1996, from memory).
pub const LOW_EVENTS_PER_PREDICTOR: f64 = 10.0;
/// Share of the smallest class below which accuracy misleads (common practice, no source).
pub const IMBALANCE_SHARE: f64 = 0.2;

/// How much more favourable than the left-out rows' own figure a bootstrap optimism-corrected
/// headline figure (AUC, macro AUC, R²) may be before the correction is called
/// into doubt, when it also lies outside that figure's 95% interval (two points; common
/// practice, no source).
pub const OPTIMISM_GAP: f64 = 0.02;

/// One warning: a short machine name and the sentence a user reads.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Warning {
    pub kind: &'static str,
    pub message: String,
}

fn warn(kind: &'static str, message: String) -> Warning {
    Warning { kind, message }
}

/// The AUC of one predictor alone for a two-class outcome, on the rows where it has a value,
/// folded to ≥ 0.5 (a predictor that ranks the classes backwards separates them as well).
/// Categories score each row by its level's share of events.
pub fn single_predictor_auc(values: &PredictorValues, codes: &[u32]) -> Option<f64> {
    let (y, score): (Vec<u32>, Vec<f64>) = match values {
        PredictorValues::Numbers(v) => codes
            .iter()
            .zip(v)
            .filter(|(_, x)| x.is_finite())
            .map(|(&c, &x)| (c, x))
            .unzip(),
        PredictorValues::Levels { codes: lv, levels } => {
            let mut events = vec![0.0; levels.len()];
            let mut rows = vec![0.0; levels.len()];
            for (&c, &l) in codes.iter().zip(lv) {
                if l != MISSING_CODE {
                    rows[l as usize] += 1.0;
                    events[l as usize] += c as f64;
                }
            }
            codes
                .iter()
                .zip(lv)
                .filter(|(_, &l)| l != MISSING_CODE)
                .map(|(&c, &l)| (c, events[l as usize] / rows[l as usize]))
                .unzip()
        }
    };
    let a = auc(&y, &score).ok()?.value;
    Some(a.max(1.0 - a))
}

/// The largest one-vs-rest AUC of one predictor alone over the classes `0..classes` (each
/// as [`single_predictor_auc`] with that class as the event), and that class; None when no
/// class has an AUC.
pub fn single_predictor_class_auc(
    values: &PredictorValues,
    codes: &[u32],
    classes: usize,
) -> Option<(f64, usize)> {
    // Numbers score every class alike: the rows with a value, sorted once.
    let sorted = match values {
        PredictorValues::Numbers(v) => {
            let kept: Vec<usize> = (0..v.len()).filter(|&r| v[r].is_finite()).collect();
            let score: Vec<f64> = kept.iter().map(|&r| v[r]).collect();
            let order = order_by(&score);
            Some((kept, score, order))
        }
        PredictorValues::Levels { .. } => None,
    };
    (0..classes)
        .filter_map(|k| {
            let is_k: Vec<u32> = codes.iter().map(|&c| u32::from(c as usize == k)).collect();
            let a = match &sorted {
                Some((kept, score, order)) => {
                    let y: Vec<u32> = kept.iter().map(|&r| is_k[r]).collect();
                    let a = auc_in_order(&y, score, order).ok()?.value;
                    a.max(1.0 - a)
                }
                None => single_predictor_auc(values, &is_k)?,
            };
            Some((a, k))
        })
        .fold(None, |best, (a, k)| match best {
            Some((b, _)) if b >= a => best,
            _ => Some((a, k)),
        })
}

/// Ranks 1..n of `x` with ties given their mean rank.
fn ranks(x: &[f64]) -> Vec<f64> {
    let mut order: Vec<usize> = (0..x.len()).collect();
    order.sort_by(|&a, &b| x[a].total_cmp(&x[b]));
    let mut r = vec![0.0; x.len()];
    let mut i = 0;
    while i < order.len() {
        let mut j = i + 1;
        while j < order.len() && x[order[j]] == x[order[i]] {
            j += 1;
        }
        let mean = (i + j + 1) as f64 / 2.0;
        for &k in &order[i..j] {
            r[k] = mean;
        }
        i = j;
    }
    r
}

/// Spearman's rank correlation (Pearson's on ranks, ties at their mean rank); None with
/// fewer than 3 rows or either side constant.
pub fn spearman(x: &[f64], y: &[f64]) -> Option<f64> {
    let n = x.len();
    if n < 3 || y.len() != n {
        return None;
    }
    let (rx, ry) = (ranks(x), ranks(y));
    let mean = (n as f64 + 1.0) / 2.0;
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for (a, b) in rx.iter().zip(&ry) {
        sxy += (a - mean) * (b - mean);
        sxx += (a - mean) * (a - mean);
        syy += (b - mean) * (b - mean);
    }
    (sxx > 0.0 && syy > 0.0).then(|| sxy / (sxx * syy).sqrt())
}

/// |Spearman| of one predictor alone with a number outcome, on the rows where both have a
/// value. Categories score each row by its level's mean outcome (as
/// [`single_predictor_auc`] scores them by their share of events).
pub fn single_predictor_spearman(values: &PredictorValues, y: &[f64]) -> Option<f64> {
    let (score, out): (Vec<f64>, Vec<f64>) = match values {
        PredictorValues::Numbers(v) => y
            .iter()
            .zip(v)
            .filter(|(t, x)| t.is_finite() && x.is_finite())
            .map(|(&t, &x)| (x, t))
            .unzip(),
        PredictorValues::Levels { codes: lv, levels } => {
            let mut sums = vec![0.0; levels.len()];
            let mut rows = vec![0.0; levels.len()];
            let present = |t: &f64, l: &u32| t.is_finite() && *l != MISSING_CODE;
            for (t, l) in y.iter().zip(lv).filter(|(t, l)| present(t, l)) {
                rows[*l as usize] += 1.0;
                sums[*l as usize] += t;
            }
            y.iter()
                .zip(lv)
                .filter(|(t, l)| present(t, l))
                .map(|(&t, &l)| (sums[l as usize] / rows[l as usize], t))
                .unzip()
        }
    };
    spearman(&score, &out).map(f64::abs)
}

/// Whether a predictor looks like a record number or code: at least 20 values, every one
/// different (and whole, for numbers) — the rule of the column summary's identifier flag.
fn identifier_like(values: &PredictorValues) -> bool {
    match values {
        PredictorValues::Numbers(v) => {
            let mut present: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
            if present.len() < 20 || present.iter().any(|x| x.fract() != 0.0) {
                return false;
            }
            present.sort_by(f64::total_cmp);
            present.windows(2).all(|w| w[0] != w[1])
        }
        PredictorValues::Levels { codes, levels } => {
            let mut counts = vec![0usize; levels.len()];
            let mut present = 0;
            for &c in codes.iter().filter(|&&c| c != MISSING_CODE) {
                counts[c as usize] += 1;
                present += 1;
            }
            let used = counts.iter().filter(|&&c| c > 0).count();
            present >= 20 && used * 10 >= present * 9
        }
    }
}

/// Predictor parameters: 1 per number, levels − 1 per category.
fn parameters(design: &Design) -> usize {
    design
        .predictors
        .iter()
        .map(|p| match &p.values {
            PredictorValues::Numbers(_) => 1,
            PredictorValues::Levels { codes, levels } => {
                let mut seen = vec![false; levels.len()];
                for &c in codes.iter().filter(|&&c| c != MISSING_CODE) {
                    seen[c as usize] = true;
                }
                seen.iter().filter(|&&s| s).count().saturating_sub(1).max(1)
            }
        })
        .sum()
}

/// Warnings that only the validation's results can give: a bootstrap optimism correction
/// whose headline figure (AUC for two classes, the macro AUC for several, R² for numbers)
/// is more than [`OPTIMISM_GAP`] above, and outside the 95% interval of, the figure of the
/// rows each refit left out. A model that fits its training rows almost perfectly (a random
/// forest, bagging, a fully grown tree, long boosting) scores almost as well on the 63% of
/// the original rows each refit was trained on, so the mean optimism comes out small and the
/// corrected figure too good (Efron & Tibshirani 1997 built the .632+ bootstrap for such
/// rules, from memory).
pub fn judged_warnings(v: &super::Validation) -> Vec<Warning> {
    let Some(left_out) = &v.left_out else {
        return Vec::new();
    };
    let headline = [
        ("auc", "AUC"),
        ("macro_auc", "macro AUC"),
        ("r_squared", "R²"),
    ]
    .into_iter()
    .find_map(|(name, words)| Some((words, v.model.metrics.get(name)?, left_out.get(name)?, name)));
    let Some((words, corrected, rows, name)) = headline else {
        return Vec::new();
    };
    let outside = rows.high.is_none_or(|high| corrected.value > high);
    if !(corrected.value - rows.value > OPTIMISM_GAP && outside) {
        return Vec::new();
    }
    let interval = match (rows.low, rows.high) {
        (Some(low), Some(high)) => format!(" (95% interval {low:.3} to {high:.3})"),
        _ => String::new(),
    };
    let apparent = v
        .apparent
        .as_ref()
        .and_then(|a| a.get(name))
        .map(|a| format!(" ({a:.3} on them)"))
        .unwrap_or_default();
    vec![warn(
        "optimism_understated",
        format!(
            "the bootstrap optimism correction gives {words} {:.3}, but the rows each refit \
             left out score {:.3}{interval}: the model fits the rows it is trained on so \
             closely{apparent} that the correction understates its optimism, as it does for \
             random forests, bagging, fully grown trees and long boosting; the truth likely \
             lies between the two. Judge this model by cross-validation (folds:K) or \
             out-of-bag rows instead",
            corrected.value, rows.value
        ),
    )]
}

/// Every warning for validating `design` by `scheme`. `table` (the file the design came
/// from, when at hand) lets columns outside the design be checked for repeated record ids.
pub fn warnings(design: &Design, scheme: &Scheme, table: Option<&Table>) -> Vec<Warning> {
    let mut out = Vec::new();
    let n = design.outcome.len();
    if let Outcome::Numbers(y) = &design.outcome {
        for p in &design.predictors {
            if let Some(r) = single_predictor_spearman(&p.values, y) {
                if r > LEAKAGE_SPEARMAN {
                    out.push(warn(
                        "leakage",
                        format!(
                            "'{}' alone follows the outcome almost exactly (|Spearman| {r:.3} \
                             on its own): check that it is not recorded after the outcome or \
                             derived from it",
                            p.name
                        ),
                    ));
                }
            }
        }
    }
    if let Outcome::Classes { codes, labels } = &design.outcome {
        for p in &design.predictors {
            let found = if labels.len() == 2 {
                single_predictor_auc(&p.values, codes).map(|a| (a, None))
            } else {
                single_predictor_class_auc(&p.values, codes, labels.len())
                    .map(|(a, k)| (a, Some(k)))
            };
            if let Some((a, class)) = found.filter(|(a, _)| *a > LEAKAGE_AUC) {
                out.push(warn(
                    "leakage",
                    match class {
                        None => format!(
                            "'{}' alone tells the classes apart (AUC {a:.3} on its own): \
                             check that it is not recorded after the outcome or derived from it",
                            p.name
                        ),
                        Some(k) => format!(
                            "'{}' alone tells class '{}' from the others (one-vs-rest AUC \
                             {a:.3} on its own): check that it is not recorded after the \
                             outcome or derived from it",
                            p.name, labels[k]
                        ),
                    },
                ));
            }
        }
        let mut counts = vec![0u64; labels.len()];
        for &c in codes {
            counts[c as usize] += 1;
        }
        let (small, &fewest) = counts
            .iter()
            .enumerate()
            .min_by_key(|(_, &c)| c)
            .unwrap_or((0, &0));
        let params = parameters(design);
        if let Ok(epp) = events_per_predictor(fewest, n as u64 - fewest, params) {
            if epp < LOW_EVENTS_PER_PREDICTOR {
                out.push(warn(
                    "events_per_predictor",
                    format!(
                        "{epp:.1} rows of the smallest class ('{}') per predictor parameter \
                         ({fewest} rows, {params} parameters), below {LOW_EVENTS_PER_PREDICTOR}: \
                         the model is likely to overfit (Peduzzi et al. 1996); use fewer \
                         predictors or more records",
                        labels[small]
                    ),
                ));
            }
        }
        if labels.len() == 2 {
            let prevalence = counts[1] as f64 / n as f64;
            if let Ok(need) = rows_for_overall_risk(prevalence, 0.05) {
                if (n as u64) < need {
                    out.push(warn(
                        "sample_size",
                        format!(
                            "{n} rows are fewer than the {need} needed to estimate the overall \
                             risk ({:.1}%) within ±5 percentage points (Riley et al. 2020, \
                             criterion i)",
                            100.0 * prevalence
                        ),
                    ));
                }
            }
        }
        let share = fewest as f64 / n as f64;
        if share < IMBALANCE_SHARE {
            let (big, &most) = counts
                .iter()
                .enumerate()
                .max_by_key(|(_, &c)| c)
                .unwrap_or((0, &0));
            out.push(warn(
                "imbalance",
                format!(
                    "class '{}' is {:.1}% of the rows: calling every row '{}' is already {:.1}% \
                     accurate, so accuracy misleads; read the AUC, balanced accuracy, \
                     calibration and net benefit",
                    labels[small],
                    100.0 * share,
                    labels[big],
                    100.0 * most as f64 / n as f64
                ),
            ));
        }
    }
    for p in &design.predictors {
        if identifier_like(&p.values) {
            out.push(warn(
                "identifier",
                format!(
                    "the predictor '{}' has a different value in every row, like a record \
                     number or code: a model can only memorise it. Leave it out (or use it as \
                     the group column if records repeat)",
                    p.name
                ),
            ));
        }
    }
    let grouped = matches!(scheme, Scheme::Groups { .. });
    if !grouped {
        if let Some(groups) = &design.groups {
            let distinct = groups.iter().copied().max().map_or(0, |m| m as usize + 1);
            if distinct < n {
                out.push(warn(
                    "grouped_rows",
                    format!(
                        "the group column holds {distinct} groups for {n} rows: rows of one \
                         group in both training and test folds make the figures optimistic. \
                         Use groups:K:COLUMN"
                    ),
                ));
            }
        } else if let Some(table) = table {
            let used: Vec<&str> = design.predictors.iter().map(|p| p.name.as_str()).collect();
            for c in &table.columns {
                if c.name == design.outcome_name || !looks_like_id_name(&c.name) {
                    continue;
                }
                let mut keys: Vec<String> =
                    design.rows.iter().filter_map(|&r| c.display(r)).collect();
                let present = keys.len();
                keys.sort_unstable();
                keys.dedup();
                if present > keys.len() && keys.len() > 1 {
                    out.push(warn(
                        "grouped_rows",
                        format!(
                            "'{}' looks like a record id and repeats ({} values over {present} \
                             rows){}: if several rows belong to one patient or site, plain folds \
                             put them on both sides and flatter the model. Use groups:K:{}",
                            c.name,
                            keys.len(),
                            if used.contains(&c.name.as_str()) {
                                ", and it is a predictor"
                            } else {
                                ""
                            },
                            c.name
                        ),
                    ));
                }
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::{read_table, ReadOptions};
    use crate::design::{build_design, DesignSpec};
    use crate::progress::Silent;

    #[test]
    fn leakage_identifiers_imbalance_and_repeated_ids_are_named() {
        let mut text = String::from("y,leak,noise,record,patient_id\n");
        for i in 0..300 {
            let y = u32::from(i % 10 == 0);
            // "leak" is the outcome plus a little; "noise" is unrelated.
            text += &format!(
                "{y},{},{},{},{}\n",
                y as f64 * 5.0 + (i % 7) as f64 * 0.1,
                (i * 37) % 11,
                1000 + i,
                i / 3
            );
        }
        let table = read_table(text.as_bytes(), &ReadOptions::default(), &mut Silent)
            .unwrap()
            .table;
        let spec = DesignSpec {
            outcome: "y".into(),
            predictors: vec!["leak".into(), "noise".into(), "record".into()],
            ..DesignSpec::default()
        };
        let design = build_design(&table, &spec).unwrap();
        let w = warnings(&design, &Scheme::Folds { k: 5, repeats: 1 }, Some(&table));
        let kinds: Vec<&str> = w.iter().map(|w| w.kind).collect();
        assert!(kinds.contains(&"leakage"), "{w:?}");
        assert!(w.iter().any(|w| w.message.contains("'leak' alone")));
        assert!(!w.iter().any(|w| w.message.contains("'noise' alone")));
        assert!(w
            .iter()
            .any(|w| w.kind == "identifier" && w.message.contains("'record'")));
        assert!(kinds.contains(&"imbalance"), "{w:?}");
        assert!(w
            .iter()
            .any(|w| w.kind == "grouped_rows" && w.message.contains("groups:K:patient_id")));
        // 30 events for 3 parameters is exactly 10: no events-per-predictor warning;
        // 300 rows < Riley's 139 for 10%? (1.96/0.05)² · 0.09 = 138.3 → 139: no warning.
        assert!(!kinds.contains(&"events_per_predictor") && !kinds.contains(&"sample_size"));
        // Grouped folds silence the repeated-id warning.
        let g = warnings(
            &design,
            &Scheme::Groups {
                k: 5,
                column: "patient_id".into(),
            },
            Some(&table),
        );
        assert!(!g.iter().any(|w| w.kind == "grouped_rows"));
    }

    fn design_of(text: &str, outcome: &str, predictors: &[&str]) -> Design {
        let table = read_table(text.as_bytes(), &ReadOptions::default(), &mut Silent)
            .unwrap()
            .table;
        let spec = DesignSpec {
            outcome: outcome.into(),
            predictors: predictors.iter().map(|p| p.to_string()).collect(),
            ..DesignSpec::default()
        };
        build_design(&table, &spec).unwrap()
    }

    #[test]
    fn leakage_of_one_class_among_several_names_the_class() {
        // Three classes; "flag" is 1 exactly for class "c" (one-vs-rest AUC 1 for c, about
        // 0.75 for a and b: no single class but c is told apart); "noise" is unrelated.
        let mut text = String::from("kind,flag,noise\n");
        for i in 0..240 {
            let kind = ["a", "b", "c"][i % 3];
            text += &format!("{kind},{},{}\n", u32::from(kind == "c"), (i * 37) % 11);
        }
        let d = design_of(&text, "kind", &["flag", "noise"]);
        let w = warnings(&d, &Scheme::Folds { k: 5, repeats: 1 }, None);
        let leaks: Vec<&Warning> = w.iter().filter(|w| w.kind == "leakage").collect();
        assert_eq!(leaks.len(), 1, "{w:?}");
        assert!(
            leaks[0].message.contains("'flag' alone tells class 'c'"),
            "{w:?}"
        );
        let Outcome::Classes { codes, .. } = &d.outcome else {
            panic!("classes")
        };
        let (a, k) = single_predictor_class_auc(&d.predictors[0].values, codes, 3).unwrap();
        assert_eq!((a, k), (1.0, 2));
    }

    #[test]
    fn several_classes_sorted_once_give_each_class_its_own_auc() {
        // A number predictor's one-vs-rest AUCs from one sort of its values against each
        // class's `single_predictor_auc` (our own consistency rule, no source needed): ties,
        // missing values, four classes, one of them ranked backwards; the same value to the
        // bit and the same class.
        let mut text = String::from("kind,x\n");
        for i in 0..400u32 {
            let kind = ["a", "b", "c", "d"][((i * 7 + i / 13) % 4) as usize];
            let x = match i % 17 {
                0 => "NA".to_string(),
                // Class b a little higher, class d mostly lower (an AUC folded above 0.5).
                _ => format!(
                    "{}",
                    ((i * 31 + 5 * (kind == "b") as u32) % 23) as i32
                        - 12 * i32::from(kind == "d" && i % 5 != 0)
                ),
            };
            text += &format!("{kind},{x}\n");
        }
        let d = design_of(&text, "kind", &["x"]);
        let Outcome::Classes { codes, .. } = &d.outcome else {
            panic!("classes")
        };
        let values = &d.predictors[0].values;
        let each: Vec<f64> = (0..4)
            .map(|k| {
                let is_k: Vec<u32> = codes.iter().map(|&c| u32::from(c == k)).collect();
                single_predictor_auc(values, &is_k).unwrap()
            })
            .collect();
        let (a, k) = single_predictor_class_auc(values, codes, 4).unwrap();
        let first_best = (0..4).fold(0, |b, i| if each[i] > each[b] { i } else { b });
        assert_eq!((a.to_bits(), k), (each[first_best].to_bits(), first_best));
        assert!(each.iter().any(|&e| e != each[0]), "{each:?}");
        assert_eq!(
            k, 3,
            "class d, ranked backwards, is told apart best: {each:?}"
        );
    }

    #[test]
    fn leakage_of_a_number_outcome_by_rank_correlation() {
        // Spearman on a small worked example (common practice, no source): ranks of x
        // (1, 2, 3, 4, 5) against y's (2, 1, 4, 3, 5) give 1 − 6·4/(5·24) = 0.8.
        let r = spearman(&[1.0, 2.0, 3.0, 4.0, 5.0], &[20.0, 10.0, 40.0, 30.0, 50.0]);
        assert!((r.unwrap() - 0.8).abs() < 1e-12);
        // Ties take their mean rank: x = (1, 1, 2) against y = (1, 2, 3) → 0.866.
        let t = spearman(&[1.0, 1.0, 2.0], &[1.0, 2.0, 3.0]).unwrap();
        assert!((t - 3f64.sqrt() / 2.0).abs() < 1e-12, "{t}");
        // "copy" is a monotone function of y (|Spearman| 1, though not linear); "noise" is
        // not related.
        let mut text = String::from("y,copy,noise\n");
        for i in 0..200 {
            let y = (i as f64 * 0.37).sin() * 10.0 + i as f64 * 0.01;
            text += &format!("{y},{},{}\n", -(y * 0.5).exp(), (i * 37) % 11);
        }
        let d = design_of(&text, "y", &["copy", "noise"]);
        let w = warnings(&d, &Scheme::Folds { k: 5, repeats: 1 }, None);
        let leaks: Vec<&Warning> = w.iter().filter(|w| w.kind == "leakage").collect();
        assert_eq!(leaks.len(), 1, "{w:?}");
        assert!(
            leaks[0]
                .message
                .contains("'copy' alone follows the outcome"),
            "{w:?}"
        );
    }
}
