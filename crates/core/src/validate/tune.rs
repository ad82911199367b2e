//! Tuning: a search over a grid (every combination) or a seeded random sample of settings,
//! each candidate scored by the same validation scheme on the same splits, the whole table
//! of candidates and scores kept. The best candidate's score is optimistic (it won because
//! it was lucky on these splits as well as good), so nested cross-validation is offered:
//! outer stratified (or grouped) folds, the search repeated inside each outer training part,
//! and the winner of each judged on its outer test rows.

use crate::design::{Design, Outcome};
use crate::error::{Error, ErrorKind, Result};
use crate::fit::FitOptions;
use crate::model::Method;
use crate::progress::{Flow, Progress, Silent};
use crate::random::{below, stream, Purpose};
use crate::settings::FitSettings;
use crate::spread::{self, Spread};

use super::{figures, run_split, splits, validate, Figures, FoldRunner, Plan, Scheme};

/// One setting's name and the values to try.
pub type Axis = (String, Vec<String>);
/// A candidate: a value per setting.
pub type Candidate = Vec<(String, String)>;

/// Every combination of the axes' values (the first axis varies slowest).
pub fn grid(axes: &[Axis]) -> Vec<Candidate> {
    axes.iter().fold(vec![Vec::new()], |acc, (name, values)| {
        acc.iter()
            .flat_map(|c| {
                values.iter().map(move |v| {
                    let mut c = c.clone();
                    c.push((name.clone(), v.clone()));
                    c
                })
            })
            .collect()
    })
}

/// `count` candidates, each axis's value drawn uniformly (seeded; repeats removed, so fewer
/// may come back when the grid is small).
pub fn random_candidates(axes: &[Axis], count: usize, seed: u64) -> Vec<Candidate> {
    let mut out: Vec<Candidate> = Vec::new();
    let mut rng = stream(seed, Purpose::TuneDraws, 0);
    let size: usize = axes.iter().map(|(_, v)| v.len().max(1)).product();
    for _ in 0..count * 20 {
        if out.len() >= count.min(size) {
            break;
        }
        let c: Candidate = axes
            .iter()
            .filter(|(_, v)| !v.is_empty())
            .map(|(n, v)| (n.clone(), v[below(&mut rng, v.len())].clone()))
            .collect();
        if !out.contains(&c) {
            out.push(c);
        }
    }
    out
}

/// Whether a smaller value of `metric` is better.
pub fn lower_is_better(metric: &str) -> bool {
    matches!(metric, "log_loss" | "brier" | "rmse" | "mae")
}

/// The usual metric to tune on: AUC (two classes), log loss (several), RMSE (numbers).
pub fn default_metric(outcome: &Outcome) -> &'static str {
    match outcome {
        Outcome::Classes { labels, .. } if labels.len() == 2 => "auc",
        Outcome::Classes { .. } => "log_loss",
        Outcome::Numbers(_) => "rmse",
    }
}

/// One candidate's result.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Scored {
    pub settings: Candidate,
    /// The metric on the pooled out-of-sample predictions (NaN when undefined).
    pub score: f64,
    /// Every point figure of the pooled predictions.
    pub figures: Figures,
    /// What the validation's results call into doubt ([`super::warnings::judged_warnings`]:
    /// a bootstrap-corrected score far above the left-out rows', which would rank models
    /// that overfit first).
    pub warnings: Vec<super::warnings::Warning>,
}

/// One outer fold of nested cross-validation.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct OuterFold {
    pub fold: usize,
    /// The candidate the inner search chose.
    pub chosen: Candidate,
    /// Its inner (optimistic) score, and its score on the outer test rows.
    pub inner_score: f64,
    pub outer_score: f64,
}

/// The search and, with nesting, its honest estimate.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Tuned {
    pub metric: String,
    pub lower_is_better: bool,
    pub scheme: String,
    /// Every candidate with its score, in the order tried.
    pub table: Vec<Scored>,
    /// Index of the best candidate in `table`.
    pub best: usize,
    /// Nested cross-validation: each outer fold's choice and score.
    pub nested: Option<Vec<OuterFold>>,
    /// The metric on the pooled outer test predictions (the figure to report).
    pub nested_score: Option<f64>,
}

fn bad(reason: String) -> Error {
    Error::new(ErrorKind::BadSetting {
        setting: "tune".into(),
        reason,
    })
}

/// What is searched: the method, fixed settings, the candidates and the metric to rank by.
#[derive(Debug, Clone, Copy)]
pub struct Space<'a> {
    pub method: Method,
    /// Settings every candidate shares (NAME, VALUE), applied before the candidate's.
    pub base: &'a [(String, String)],
    pub candidates: &'a [Candidate],
    pub metric: &'a str,
}

fn settings_for(
    design: &Design,
    method: Method,
    base: &[(String, String)],
    candidate: &Candidate,
) -> Result<FitSettings> {
    let sets: Vec<(String, String)> = base.iter().chain(candidate).cloned().collect();
    FitSettings::build(
        method,
        design.predictors.len(),
        matches!(design.outcome, Outcome::Numbers(_)),
        &design.outcome_name,
        &sets,
    )
    .map_err(bad)
}

/// How the candidates' fits are run: one candidate after another with each one's splits
/// handed to `runner` (default: in order), or, with `spread`, the candidates themselves
/// spread over a caller's threads, each validated in order on its own thread. Every
/// candidate's fits depend only on its settings, the plan and the seeds, so the table is
/// the same either way.
#[derive(Clone, Copy, Default)]
pub struct Runners<'a> {
    pub runner: Option<FoldRunner<'a>>,
    pub spread: Option<Spread<'a>>,
}

/// Scores every candidate on `design` by `plan` and returns the table and the best.
fn search(
    design: &Design,
    space: &Space<'_>,
    plan: &Plan,
    runners: Runners<'_>,
    progress: &mut dyn Progress,
) -> Result<(Vec<Scored>, usize)> {
    let Space {
        method,
        base,
        candidates,
        metric,
    } = *space;
    let score = |c: &Candidate,
                 runner: Option<FoldRunner<'_>>,
                 progress: &mut dyn Progress|
     -> Result<Scored> {
        let settings = settings_for(design, method, base, c)?;
        let v = validate(
            design,
            &settings,
            plan,
            FitOptions::default(),
            runner,
            progress,
        )?;
        let figures: Figures = v
            .model
            .metrics
            .iter()
            .map(|(k, e)| (k.clone(), e.value))
            .collect();
        Ok(Scored {
            settings: c.clone(),
            score: figures.get(metric).copied().unwrap_or(f64::NAN),
            figures,
            warnings: super::warnings::judged_warnings(&v),
        })
    };
    let table = match runners.spread {
        Some(spread) => {
            if progress.step("candidates", 0, candidates.len() as u64) == Flow::Stop {
                return Err(Error::new(ErrorKind::Cancelled));
            }
            let scored = spread::map(Some(spread), candidates.len(), |i| {
                score(&candidates[i], None, &mut Silent)
            });
            let table = scored.into_iter().collect::<Result<Vec<Scored>>>()?;
            progress.step(
                "candidates",
                candidates.len() as u64,
                candidates.len() as u64,
            );
            table
        }
        None => {
            let mut table = Vec::with_capacity(candidates.len());
            for (i, c) in candidates.iter().enumerate() {
                let mut inner = super::InSplit {
                    outer: &mut *progress,
                    index: i,
                    count: candidates.len(),
                };
                table.push(score(c, runners.runner, &mut inner)?);
            }
            table
        }
    };
    let lower = lower_is_better(metric);
    let best = (0..table.len())
        .filter(|&i| table[i].score.is_finite())
        .min_by(|&a, &b| {
            let (x, y) = (table[a].score, table[b].score);
            if lower {
                x.total_cmp(&y)
            } else {
                y.total_cmp(&x)
            }
        })
        .ok_or_else(|| {
            bad(format!(
                "'{metric}' could not be computed for any candidate; choose another metric"
            ))
        })?;
    Ok((table, best))
}

/// Scores the candidates of `space` by `plan`; with `nested` = Some(k), also the nested
/// k-fold estimate (outer folds grouped when the plan's are).
pub fn tune(
    design: &Design,
    space: &Space<'_>,
    plan: &Plan,
    nested: Option<usize>,
    runners: Runners<'_>,
    progress: &mut dyn Progress,
) -> Result<Tuned> {
    let (method, base, metric) = (space.method, space.base, space.metric);
    let candidates = space.candidates;
    if candidates.is_empty() {
        return Err(bad(
            "no candidate settings to try; give at least one value".into()
        ));
    }
    // Judge with point values only: the intervals are not needed to rank candidates.
    let quick = Plan {
        resamples: 0,
        ..plan.clone()
    };
    let (table, best) = search(design, space, &quick, runners, progress)?;
    let (mut outer_folds, mut nested_score) = (None, None);
    if let Some(k) = nested {
        let outer_scheme = match &plan.scheme {
            Scheme::Groups { column, .. } => Scheme::Groups {
                k,
                column: column.clone(),
            },
            _ => Scheme::Folds { k, repeats: 1 },
        };
        let outer = splits(design, &outer_scheme, plan.seed.wrapping_add(1))?;
        let outputs = design.outcome.outputs();
        let mut pooled = vec![f64::NAN; design.outcome.len() * outputs];
        let mut folds = Vec::with_capacity(outer.len());
        for split in &outer {
            let inner_design = design.select_rows(&split.train);
            let (t, b) = search(&inner_design, space, &quick, runners, &mut Silent)?;
            let settings = settings_for(design, method, base, &t[b].settings)?;
            let run = run_split(
                design,
                &settings,
                &quick,
                split,
                FitOptions::default(),
                &mut Silent,
            )?;
            for (pos, &r) in split.test.iter().enumerate() {
                pooled[r * outputs..(r + 1) * outputs]
                    .copy_from_slice(&run.predictions[pos * outputs..(pos + 1) * outputs]);
            }
            folds.push(OuterFold {
                fold: split.fold,
                chosen: t[b].settings.clone(),
                inner_score: t[b].score,
                outer_score: run.figures.get(metric).copied().unwrap_or(f64::NAN),
            });
            if progress.step("outer folds", folds.len() as u64, outer.len() as u64) == Flow::Stop {
                return Err(Error::new(ErrorKind::Cancelled));
            }
        }
        let all = figures(&design.outcome, &pooled, plan.threshold);
        nested_score = all.get(metric).copied();
        outer_folds = Some(folds);
    }
    Ok(Tuned {
        metric: metric.to_string(),
        lower_is_better: lower_is_better(metric),
        scheme: plan.scheme.words(),
        table,
        best,
        nested: outer_folds,
        nested_score,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn grids_and_random_samples() {
        let axes = vec![
            (
                "depth".to_string(),
                vec!["2".to_string(), "4".into(), "8".into()],
            ),
            ("trees".to_string(), vec!["10".to_string(), "50".into()]),
        ];
        let g = grid(&axes);
        assert_eq!(g.len(), 6);
        assert_eq!(
            g[1],
            vec![("depth".into(), "2".into()), ("trees".into(), "50".into())]
        );
        let r = random_candidates(&axes, 4, 1);
        assert_eq!(r.len(), 4);
        assert!(r.iter().all(|c| g.contains(c)));
        assert_eq!(r, random_candidates(&axes, 4, 1));
        assert_eq!(random_candidates(&axes, 100, 1).len(), 6);
    }

    #[test]
    fn a_search_ranks_candidates_and_nesting_reports_each_outer_choice() {
        let d = super::super::tests::problem();
        let axes = vec![("depth".to_string(), vec!["1".to_string(), "4".into()])];
        let plan = Plan {
            scheme: Scheme::Folds { k: 3, repeats: 1 },
            seed: 2,
            threshold: 0.5,
            resamples: 0,
            baseline: false,
        };
        let t = tune(
            &d,
            &Space {
                method: Method::Tree,
                base: &[],
                candidates: &grid(&axes),
                metric: "auc",
            },
            &plan,
            Some(3),
            Runners::default(),
            &mut Silent,
        )
        .unwrap();
        assert_eq!(t.table.len(), 2);
        // y depends on a + b: one split (depth 1) cannot follow the diagonal; depth 4 can.
        assert_eq!(t.table[t.best].settings[0].1, "4", "{:?}", t.table);
        let nested = t.nested.as_ref().unwrap();
        assert_eq!(nested.len(), 3);
        assert!(t.nested_score.unwrap() > 0.7);
        // Candidates spread over "threads" (here: run backwards) give the same table, the
        // same choices and the same nested score.
        let backwards = |count: usize, job: &(dyn Fn(usize) + Sync)| {
            (0..count).rev().for_each(job);
        };
        let spread_out = tune(
            &d,
            &Space {
                method: Method::Forest,
                base: &[("trees".to_string(), "5".to_string())],
                candidates: &grid(&axes),
                metric: "auc",
            },
            &plan,
            Some(3),
            Runners {
                runner: None,
                spread: Some(&backwards),
            },
            &mut Silent,
        )
        .unwrap();
        let in_order = tune(
            &d,
            &Space {
                method: Method::Forest,
                base: &[("trees".to_string(), "5".to_string())],
                candidates: &grid(&axes),
                metric: "auc",
            },
            &plan,
            Some(3),
            Runners::default(),
            &mut Silent,
        )
        .unwrap();
        assert_eq!(spread_out, in_order);
    }
}
