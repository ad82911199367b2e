//! How the prediction moves with one predictor, or a pair, with the others as they are:
//!
//! - partial dependence (Friedman, Ann Stat 2001;29:1189–1232, section 8.2): for each grid
//!   value, the mean prediction over the given rows with the predictor set to that value in
//!   every row ("brute force", the definition itself);
//! - ICE curves (Goldstein, Kapelner, Bleich & Pitkin, J Comput Graph Stat 2015;24:44–65):
//!   the same for single records, before averaging;
//! - the grid: quantiles of the rows' values for numbers (every distinct value when there
//!   are few), the levels for categories and yes/no, with the number of rows nearest each
//!   grid value alongside, so a reader sees where the curve rests on few records;
//! - Friedman's H statistic for a pair (Friedman & Popescu, Ann Appl Stat 2008;2:916–954,
//!   eq. 44): the share of the variance of the pair's joint partial dependence that the two
//!   separate ones do not explain, on a sample of rows.
//!
//! Everything is on the model's prediction scale: class probabilities, or the number.

use crate::binning::Records;
use crate::data::format_statistic;
use crate::error::{Error, ErrorKind, Result};
use crate::explain::{leaf_by, Additive};
use crate::metrics::quantile_sorted;
use crate::model::{Model, Reading};
use crate::progress::{Flow, Progress};
use crate::random::{below, stream, Purpose};

fn bad(reason: String) -> Error {
    Error::new(ErrorKind::BadSetting {
        setting: "dependence".into(),
        reason,
    })
}

/// The index of the model's predictor called `name`, or an error listing the predictors.
pub fn predictor_index(model: &Model, name: &str) -> Result<usize> {
    model
        .predictors
        .iter()
        .position(|p| p.name == name)
        .ok_or_else(|| {
            let names: Vec<&str> = model.predictors.iter().map(|p| p.name.as_str()).collect();
            bad(format!(
                "'{name}' is not one of the model's predictors ({}); names are matched exactly",
                names.join(", ")
            ))
        })
}

/// The values one predictor is set to.
#[derive(Debug, Clone, PartialEq)]
pub struct Grid {
    pub predictor: usize,
    /// Values as records hold them: numbers, or a category's training bin, or 0/1.
    pub values: Vec<f64>,
    pub labels: Vec<String>,
    /// Rows nearest each grid value (numbers: between the midpoints to the neighbouring
    /// values; categories: rows with that level).
    pub counts: Vec<usize>,
    /// Rows where the predictor is missing (in no cell).
    pub missing: usize,
}

/// The grid for predictor `j` over `records`: at most `points` quantiles from 5% to 95%
/// (type 7) for numbers, or every distinct value when there are `points` or fewer; every
/// level (training bin) for categories and yes/no. A predictor with one value (or none) in
/// these rows is refused: there is no range to move it over.
pub fn grid(model: &Model, records: &Records, j: usize, points: usize) -> Result<Grid> {
    let p = &model.predictors[j];
    let mut known: Vec<f64> = (0..records.rows)
        .map(|r| records.value(j, r))
        .filter(|x| !x.is_nan())
        .collect();
    let missing = records.rows - known.len();
    known.sort_by(f64::total_cmp);
    let mut distinct = known.clone();
    distinct.dedup();
    if distinct.len() < 2 {
        return Err(bad(format!(
            "'{}' has {} in these {} rows: there is no range to vary it over. Choose \
             another predictor, or rows where it varies",
            p.name,
            match distinct.first() {
                Some(&v) => format!("the single value {}", label_of(model, j, v)),
                None => "no values".into(),
            },
            records.rows
        )));
    }
    let (values, counts) = match &p.reading {
        Reading::Number => {
            let values: Vec<f64> = if distinct.len() <= points.max(2) {
                distinct
            } else {
                let mut v: Vec<f64> = (0..points.max(2))
                    .map(|i| {
                        quantile_sorted(&known, 0.05 + 0.9 * i as f64 / (points.max(2) - 1) as f64)
                    })
                    .collect();
                v.dedup();
                v
            };
            let mut counts = vec![0usize; values.len()];
            for &x in &known {
                // The nearest grid value (ties to the lower one).
                let i = values.partition_point(|&g| g < x);
                let cell = if i == 0 {
                    0
                } else if i == values.len() || x - values[i - 1] <= values[i] - x {
                    i - 1
                } else {
                    i
                };
                counts[cell] += 1;
            }
            (values, counts)
        }
        Reading::YesNo { .. } | Reading::Category { .. } => {
            let mut values: Vec<f64> = match &p.reading {
                Reading::Category { bin_of_level, .. } => {
                    bin_of_level.iter().map(|&b| b as f64).collect()
                }
                _ => vec![0.0, 1.0],
            };
            values.extend(distinct.iter().copied());
            values.sort_by(f64::total_cmp);
            values.dedup();
            let counts = values
                .iter()
                .map(|v| known.iter().filter(|&&x| x == *v).count())
                .collect();
            (values, counts)
        }
    };
    Ok(Grid {
        predictor: j,
        labels: values.iter().map(|&v| label_of(model, j, v)).collect(),
        values,
        counts,
        missing,
    })
}

/// How a record value of predictor `j` reads to people: the number (or date), the yes/no
/// label, or the category label(s) of a training bin.
pub fn label_of(model: &Model, j: usize, v: f64) -> String {
    let p = &model.predictors[j];
    match &p.reading {
        Reading::Number => format_statistic(p.kind, v),
        Reading::YesNo { labels } => labels[(v != 0.0) as usize].clone(),
        Reading::Category {
            levels,
            bin_of_level,
            ..
        } => {
            let names: Vec<&str> = levels
                .iter()
                .zip(bin_of_level)
                .filter(|(_, &b)| b as f64 == v)
                .map(|(l, _)| l.as_str())
                .collect();
            if names.is_empty() {
                "(labels not seen in training)".into()
            } else {
                names.join(" / ")
            }
        }
    }
}

/// Partial dependence over one grid or the product of two.
#[derive(Debug, Clone)]
pub struct Dependence {
    pub grids: Vec<Grid>,
    /// What each output is (class probabilities, or the number).
    pub outputs: Vec<String>,
    /// Mean prediction per cell (`cells × outputs`; for a pair, cell `a · len₂ + b`).
    pub average: Vec<f64>,
    /// ICE: the rows followed and their predictions (`rows × cells × outputs`).
    pub ice_rows: Vec<usize>,
    pub ice: Vec<f64>,
}

impl Dependence {
    pub fn cells(&self) -> usize {
        self.grids.iter().map(|g| g.values.len()).product()
    }
}

/// The names of the model's predictions.
pub fn output_names(model: &Model) -> Vec<String> {
    match &model.classes {
        Some(c) => c.iter().map(|c| format!("probability of '{c}'")).collect(),
        None => vec![format!("predicted '{}'", model.outcome)],
    }
}

/// Partial dependence of the model's predictions on the predictors of `grids` (one or two)
/// over every row of `records`, and the ICE curves of `ice_rows`. Progress per tree.
pub fn partial_dependence(
    model: &Model,
    records: &Records,
    grids: &[Grid],
    ice_rows: &[usize],
    progress: &mut dyn Progress,
) -> Result<Dependence> {
    if grids.is_empty() || grids.len() > 2 {
        return Err(bad("give one predictor or a pair".into()));
    }
    if grids.len() == 2 && grids[0].predictor == grids[1].predictor {
        return Err(bad("a pair needs two different predictors".into()));
    }
    if let Some(&r) = ice_rows.iter().find(|&&r| r >= records.rows) {
        return Err(bad(format!(
            "row {} is beyond the {} rows",
            r + 1,
            records.rows
        )));
    }
    let add = Additive::of(model);
    let width = add.width();
    let n = records.rows;
    // The cells' values per predictor: (j1, v1) and optionally (j2, v2).
    let cells: Vec<(f64, f64)> = match grids {
        [g] => g.values.iter().map(|&v| (v, f64::NAN)).collect(),
        [a, b] => a
            .values
            .iter()
            .flat_map(|&u| b.values.iter().map(move |&v| (u, v)))
            .collect(),
        _ => unreachable!(),
    };
    let j1 = grids[0].predictor;
    let j2 = grids.get(1).map_or(usize::MAX, |g| g.predictor);
    let mut sums = vec![0.0; cells.len() * n * width];
    for s in sums.chunks_exact_mut(width.max(1)) {
        s.copy_from_slice(&add.offset);
    }
    let total = add.members.len() as u64;
    for (m, member) in add.members.iter().enumerate() {
        for (c, &(u, v)) in cells.iter().enumerate() {
            for r in 0..n {
                let leaf = leaf_by(&member.tree, |f| {
                    if f == j1 {
                        u
                    } else if f == j2 {
                        v
                    } else {
                        records.value(f, r)
                    }
                });
                let at = (c * n + r) * width;
                add.add_leaf(m, leaf, 1.0, &mut sums[at..at + width]);
            }
        }
        if progress.step("trees", m as u64 + 1, total) == Flow::Stop {
            return Err(Error::new(ErrorKind::Cancelled));
        }
    }
    let k = model.outputs();
    let predictions = add.finish_all(&sums, k);
    let mut average = vec![0.0; cells.len() * k];
    for c in 0..cells.len() {
        for r in 0..n {
            for o in 0..k {
                average[c * k + o] += predictions[(c * n + r) * k + o];
            }
        }
    }
    average.iter_mut().for_each(|a| *a /= n.max(1) as f64);
    let mut ice = Vec::with_capacity(ice_rows.len() * cells.len() * k);
    for &r in ice_rows {
        for c in 0..cells.len() {
            ice.extend_from_slice(&predictions[(c * n + r) * k..(c * n + r + 1) * k]);
        }
    }
    Ok(Dependence {
        grids: grids.to_vec(),
        outputs: output_names(model),
        average,
        ice_rows: ice_rows.to_vec(),
        ice,
    })
}

/// `count` distinct rows of `rows` drawn with the seeded stream (all of them, in order, when
/// there are no more than `count`), sorted.
pub fn sample_rows(rows: usize, count: usize, seed: u64) -> Vec<usize> {
    if rows <= count {
        return (0..rows).collect();
    }
    let mut rng = stream(seed, Purpose::ExplainSample, 0);
    let mut all: Vec<usize> = (0..rows).collect();
    for k in 0..count {
        all.swap(k, k + below(&mut rng, rows - k));
    }
    all.truncate(count);
    all.sort_unstable();
    all
}

/// Friedman's H for one pair.
#[derive(Debug, Clone, PartialEq)]
pub struct Interaction {
    pub pair: (usize, usize),
    /// H² (0: the pair's effects add up; 1: all of their joint effect is interaction).
    pub h_squared: f64,
}

/// The centred partial dependence at each row of `sample` with predictors `js` set to that
/// row's own values, averaged over the rows of `sample` (Friedman & Popescu 2008, eq. 8,
/// evaluated at the data), `sample.rows × outputs` values.
fn pd_at_rows(add: &Additive, outputs: usize, sample: &Records, js: &[usize]) -> Vec<f64> {
    let m = sample.rows;
    let width = add.width();
    let mut out = vec![0.0; m * outputs];
    let mut sums = vec![0.0; m * width];
    let mut p = vec![0.0; outputs];
    for i in 0..m {
        for s in sums.chunks_exact_mut(width.max(1)) {
            s.copy_from_slice(&add.offset);
        }
        for (t, member) in add.members.iter().enumerate() {
            for l in 0..m {
                let leaf = leaf_by(&member.tree, |f| {
                    sample.value(f, if js.contains(&f) { i } else { l })
                });
                add.add_leaf(t, leaf, 1.0, &mut sums[l * width..(l + 1) * width]);
            }
        }
        for l in 0..m {
            add.finish(&sums[l * width..(l + 1) * width], &mut p);
            for (o, v) in out[i * outputs..(i + 1) * outputs].iter_mut().zip(&p) {
                *o += v / m as f64;
            }
        }
    }
    // Centre each output over the rows.
    for o in 0..outputs {
        let mean = (0..m).map(|i| out[i * outputs + o]).sum::<f64>() / m.max(1) as f64;
        for i in 0..m {
            out[i * outputs + o] -= mean;
        }
    }
    out
}

/// Friedman's H² for every pair of `predictors` on the rows of `sample` (m rows cost m² tree
/// walks per predictor and per pair, so pass a sample of a few hundred rows at most). For
/// several outputs the squares are summed over the outputs (for two classes only the
/// second class's probability is used, the other being its complement). Strongest first.
pub fn interactions(
    model: &Model,
    sample: &Records,
    predictors: &[usize],
    progress: &mut dyn Progress,
) -> Result<Vec<Interaction>> {
    let add = Additive::of(model);
    let k = model.outputs();
    // Which outputs count: the last class for two classes, else all.
    let first = if k == 2 { 1 } else { 0 };
    let pairs = predictors.len() * predictors.len().saturating_sub(1) / 2;
    let total = (predictors.len() + pairs) as u64;
    let mut done = 0;
    let mut single = Vec::with_capacity(predictors.len());
    for &j in predictors {
        single.push(pd_at_rows(&add, k, sample, &[j]));
        done += 1;
        if progress.step("partial dependence", done, total) == Flow::Stop {
            return Err(Error::new(ErrorKind::Cancelled));
        }
    }
    let mut out = Vec::with_capacity(pairs);
    for a in 0..predictors.len() {
        for b in a + 1..predictors.len() {
            let joint = pd_at_rows(&add, k, sample, &[predictors[a], predictors[b]]);
            let (mut num, mut den) = (0.0, 0.0);
            for i in 0..sample.rows {
                for o in first..k {
                    let at = i * k + o;
                    num += (joint[at] - single[a][at] - single[b][at]).powi(2);
                    den += joint[at].powi(2);
                }
            }
            out.push(Interaction {
                pair: (predictors[a], predictors[b]),
                h_squared: if den > 0.0 { num / den } else { 0.0 },
            });
            done += 1;
            if progress.step("partial dependence", done, total) == Flow::Stop {
                return Err(Error::new(ErrorKind::Cancelled));
            }
        }
    }
    out.sort_by(|x, y| y.h_squared.total_cmp(&x.h_squared));
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::explain::testing;
    use crate::model::Method;
    use crate::progress::Silent;
    use crate::tree::Rows;

    #[test]
    fn partial_dependence_is_the_mean_of_predictions_with_the_value_set() {
        // The definition (Friedman 2001, eq. 40 averaged over the data), by hand.
        for (name, model, records, _) in testing::every_kind() {
            let g1 = grid(&model, &records, 0, 6).unwrap();
            let g2 = grid(&model, &records, 4, 6).unwrap();
            let k = model.outputs();
            let n = records.rows;
            let d = partial_dependence(
                &model,
                &records,
                &[g1.clone(), g2.clone()],
                &[3],
                &mut Silent,
            )
            .unwrap();
            assert_eq!(d.cells(), g1.values.len() * g2.values.len());
            let mut p = vec![0.0; k];
            for (a, &u) in g1.values.iter().enumerate() {
                for (b, &v) in g2.values.iter().enumerate() {
                    let mut values = Vec::new();
                    for j in 0..model.predictors.len() {
                        values.extend((0..n).map(|r| match j {
                            0 => u,
                            4 => v,
                            _ => records.value(j, r),
                        }));
                    }
                    let set = Records::from_columns(n, values);
                    let mut mean = vec![0.0; k];
                    for r in 0..n {
                        model.predict(Rows::Records(&set), r, &mut p);
                        for (m, q) in mean.iter_mut().zip(&p) {
                            *m += q / n as f64;
                        }
                        if r == 3 {
                            let c = a * g2.values.len() + b;
                            for (o, q) in p.iter().enumerate() {
                                assert!((d.ice[c * k + o] - q).abs() < 1e-12, "{name} ice");
                            }
                        }
                    }
                    let c = a * g2.values.len() + b;
                    for (o, m) in mean.iter().enumerate() {
                        assert!((d.average[c * k + o] - m).abs() < 1e-12, "{name}");
                    }
                }
            }
        }
    }

    #[test]
    fn grids_follow_quantiles_levels_and_count_every_known_row() {
        let (model, records, _) = testing::model(Method::Forest, "y", None);
        let g = grid(&model, &records, 0, 10).unwrap();
        assert_eq!(g.values.len(), 10);
        assert!(g.values.windows(2).all(|w| w[0] < w[1]));
        assert_eq!(g.counts.iter().sum::<usize>() + g.missing, records.rows);
        assert!(g.missing > 0, "predictor a has missing values");
        let e = grid(&model, &records, 4, 10).unwrap();
        assert_eq!(e.counts.iter().sum::<usize>(), records.rows);
        let mut labels = e.labels.clone();
        labels.sort();
        assert_eq!(labels, ["blue", "green", "grey", "red"]);
        // A constant predictor is refused by name.
        let constant = Records::from_columns(records.rows, vec![1.0; records.rows * 5]);
        let err = grid(&model, &constant, 1, 10).unwrap_err().to_string();
        assert!(err.contains("'b' has the single value 1"), "{err}");
        assert!(predictor_index(&model, "nope")
            .unwrap_err()
            .to_string()
            .contains("a, b, c, d, e"));
    }

    #[test]
    fn h_finds_the_built_in_interaction() {
        // In testing::csv, v = 3a + 2·[b > 0.5]·c + [e = red] + noise: b and c interact,
        // a and d do not (d is noise).
        let (model, records, _) = testing::model(Method::Boosting, "v", None);
        let sample = records.select_rows(&sample_rows(records.rows, 60, 1));
        let h = interactions(&model, &sample, &[0, 1, 2, 3], &mut Silent).unwrap();
        assert_eq!(h[0].pair, (1, 2), "{h:?}");
        let ad = h.iter().find(|x| x.pair == (0, 3)).unwrap();
        assert!(
            h[0].h_squared > 0.1 && ad.h_squared < h[0].h_squared / 3.0,
            "{h:?}"
        );
    }
}
