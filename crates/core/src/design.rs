//! The modelling design: which column is the outcome, which are predictors, and the optional
//! row weights and groups, checked once against a [`Table`] and turned into plain arrays for
//! the learners. Every way a choice of columns cannot make a model (a one-class outcome, no
//! usable predictor, negative weights, ...) is an error saying what to change.

use crate::data::{Column, Kind, Table, Values, MISSING_CODE};
use crate::error::{Error, ErrorKind, Result};

/// The user's choice of columns, by name.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct DesignSpec {
    pub outcome: String,
    pub predictors: Vec<String>,
    pub weight: Option<String>,
    pub group: Option<String>,
    /// A two-class outcome's class called positive (the event): it becomes class code 1,
    /// whose probability every two-class figure is about. `None`: the second label ("yes"
    /// of a yes/no column, else the later label in order).
    pub positive: Option<String>,
}

/// What is to be predicted.
#[derive(Debug, Clone, PartialEq)]
pub enum Outcome {
    /// Classes 0..labels.len(), one code per used row.
    Classes {
        codes: Vec<u32>,
        labels: Vec<String>,
    },
    /// A number per used row (regression).
    Numbers(Vec<f64>),
}

impl Outcome {
    pub fn len(&self) -> usize {
        match self {
            Outcome::Classes { codes, .. } => codes.len(),
            Outcome::Numbers(v) => v.len(),
        }
    }
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Values a prediction has for this outcome: one probability per class, or the number.
    pub fn outputs(&self) -> usize {
        match self {
            Outcome::Classes { labels, .. } => labels.len(),
            Outcome::Numbers(_) => 1,
        }
    }

    /// The outcome of `rows` only (indices, in that order; repeats allowed).
    pub fn select(&self, rows: &[usize]) -> Outcome {
        match self {
            Outcome::Classes { codes, labels } => Outcome::Classes {
                codes: rows.iter().map(|&r| codes[r]).collect(),
                labels: labels.clone(),
            },
            Outcome::Numbers(v) => Outcome::Numbers(rows.iter().map(|&r| v[r]).collect()),
        }
    }
}

/// A predictor's values over the used rows.
#[derive(Debug, Clone, PartialEq)]
pub enum PredictorValues {
    /// Numbers, with NaN for missing (dates as days, yes/no as 0/1).
    Numbers(Vec<f64>),
    /// Category codes into `levels`, [`MISSING_CODE`] for missing.
    Levels {
        codes: Vec<u32>,
        levels: Vec<String>,
    },
}

#[derive(Debug, Clone, PartialEq)]
pub struct Predictor {
    pub name: String,
    pub kind: Kind,
    pub values: PredictorValues,
    /// Yes/no predictors: the words the file used for 0 and 1 (kept for saved models, which
    /// read new files by label).
    pub yes_no_labels: Option<[String; 2]>,
}

/// A checked design: every array has one entry per used row.
#[derive(Debug, Clone, PartialEq)]
pub struct Design {
    pub outcome_name: String,
    pub outcome: Outcome,
    pub predictors: Vec<Predictor>,
    pub weights: Option<Vec<f64>>,
    /// Group codes (patient, site) for grouped validation.
    pub groups: Option<Vec<u32>>,
    /// The table rows used, in order (rows with a missing outcome are left out).
    pub rows: Vec<usize>,
    pub notices: Vec<String>,
}

impl Design {
    /// The per-row statistics the tree grower sums: for classes, the row's weight in its
    /// own class (times its class weight when `balanced`: n / (K · n_k), the usual
    /// "balanced" rule, as in scikit-learn's documentation); for numbers `(w, w·y)`.
    /// Returns the statistics and their number per row.
    pub fn row_statistics(&self, balanced: bool) -> (Vec<f64>, usize) {
        let weight = |r: usize| self.weights.as_ref().map_or(1.0, |w| w[r]);
        match &self.outcome {
            Outcome::Classes { codes, labels } => {
                let k = labels.len();
                let mut class_weight = vec![1.0; k];
                if balanced {
                    let mut counts = vec![0usize; k];
                    for &c in codes {
                        counts[c as usize] += 1;
                    }
                    for (cw, &n) in class_weight.iter_mut().zip(&counts) {
                        *cw = if n == 0 {
                            0.0
                        } else {
                            codes.len() as f64 / (k as f64 * n as f64)
                        };
                    }
                }
                let mut s = vec![0.0; codes.len() * k];
                for (r, &c) in codes.iter().enumerate() {
                    s[r * k + c as usize] = weight(r) * class_weight[c as usize];
                }
                (s, k)
            }
            Outcome::Numbers(v) => (
                v.iter()
                    .enumerate()
                    .flat_map(|(r, &y)| [weight(r), weight(r) * y])
                    .collect(),
                2,
            ),
        }
    }
}

impl Design {
    /// The design of `rows` only (indices into this design's rows, in that order; repeats
    /// allowed, as a bootstrap sample has them). Validation fits each fold on such a subset,
    /// so binning and everything else learnt from the rows sees the training part only.
    pub fn select_rows(&self, rows: &[usize]) -> Design {
        let pick_f = |v: &[f64]| rows.iter().map(|&r| v[r]).collect::<Vec<f64>>();
        let pick_u = |v: &[u32]| rows.iter().map(|&r| v[r]).collect::<Vec<u32>>();
        Design {
            outcome_name: self.outcome_name.clone(),
            outcome: self.outcome.select(rows),
            predictors: self
                .predictors
                .iter()
                .map(|p| Predictor {
                    name: p.name.clone(),
                    kind: p.kind,
                    values: match &p.values {
                        PredictorValues::Numbers(v) => PredictorValues::Numbers(pick_f(v)),
                        PredictorValues::Levels { codes, levels } => PredictorValues::Levels {
                            codes: pick_u(codes),
                            levels: levels.clone(),
                        },
                    },
                    yes_no_labels: p.yes_no_labels.clone(),
                })
                .collect(),
            weights: self.weights.as_deref().map(pick_f),
            groups: self.groups.as_deref().map(pick_u),
            rows: rows.iter().map(|&r| self.rows[r]).collect(),
            notices: Vec::new(),
        }
    }
}

/// For tests across the crate: the design of `outcome` from `predictors` in CSV `text`.
#[cfg(test)]
pub(crate) fn design_from_csv(text: &str, outcome: &str, predictors: &[&str]) -> Design {
    use crate::data::{read_table, ReadOptions};
    let table = read_table(
        text.as_bytes(),
        &ReadOptions::default(),
        &mut crate::progress::Silent,
    )
    .unwrap()
    .table;
    let spec = DesignSpec {
        outcome: outcome.into(),
        predictors: predictors.iter().map(|s| s.to_string()).collect(),
        ..DesignSpec::default()
    };
    build_design(&table, &spec).unwrap()
}

fn bad(reason: String) -> Error {
    Error::new(ErrorKind::BadDesign { reason })
}

fn find<'t>(table: &'t Table, name: &str) -> Result<&'t Column> {
    table.column(name).ok_or_else(|| {
        Error::new(ErrorKind::NoSuchColumn {
            name: name.to_string(),
            available: table.columns.iter().map(|c| c.name.clone()).collect(),
        })
    })
}

/// Checks `spec` against `table` and builds the design.
pub fn build_design(table: &Table, spec: &DesignSpec) -> Result<Design> {
    let out = find(table, &spec.outcome)?;
    let mut notices = Vec::new();
    if out.kind == Kind::Text {
        return Err(bad(format!(
            "the outcome '{}' is free text; if its values are classes, set its kind to category",
            out.name
        )));
    }
    let rows: Vec<usize> = (0..table.rows)
        .filter(|&r| !out.values.is_missing(r))
        .collect();
    let dropped = table.rows - rows.len();
    if dropped > 0 {
        notices.push(format!(
            "{dropped} row(s) have no value for the outcome '{}' and are left out",
            out.name
        ));
    }
    if rows.is_empty() {
        return Err(bad(format!(
            "the outcome '{}' has no values at all",
            out.name
        )));
    }
    let outcome = match (&out.values, out.kind) {
        (Values::Numbers(v), Kind::YesNo) => {
            let labels = out
                .yes_no_labels
                .clone()
                .unwrap_or_else(|| ["0".into(), "1".into()]);
            Outcome::Classes {
                codes: rows.iter().map(|&r| (v[r] != 0.0) as u32).collect(),
                labels: labels.to_vec(),
            }
        }
        (Values::Numbers(v), _) => Outcome::Numbers(rows.iter().map(|&r| v[r]).collect()),
        (Values::Levels { codes, levels }, _) => {
            // Renumber the classes that occur, in the order of their labels.
            let mut used: Vec<u32> = rows.iter().map(|&r| codes[r]).collect();
            used.sort_unstable();
            used.dedup();
            let mut order: Vec<u32> = used.clone();
            order.sort_by(|&a, &b| levels[a as usize].cmp(&levels[b as usize]));
            let mut map = vec![u32::MAX; levels.len()];
            for (new, &old) in order.iter().enumerate() {
                map[old as usize] = new as u32;
            }
            Outcome::Classes {
                codes: rows.iter().map(|&r| map[codes[r] as usize]).collect(),
                labels: order.iter().map(|&c| levels[c as usize].clone()).collect(),
            }
        }
    };
    let outcome = match (outcome, &spec.positive) {
        (Outcome::Classes { codes, labels }, Some(positive)) => {
            let at = labels.iter().position(|l| l == positive).ok_or_else(|| {
                bad(format!(
                    "the class called positive, '{positive}', is not among the classes of the outcome '{}' ({}); choose one of those",
                    out.name,
                    labels.join(", ")
                ))
            })?;
            if labels.len() != 2 {
                return Err(bad(format!(
                    "a class called positive needs an outcome with two classes; '{}' has {}",
                    out.name,
                    labels.len()
                )));
            }
            if at == 0 {
                // The positive class becomes code 1.
                Outcome::Classes {
                    codes: codes.iter().map(|&c| 1 - c).collect(),
                    labels: vec![labels[1].clone(), labels[0].clone()],
                }
            } else {
                Outcome::Classes { codes, labels }
            }
        }
        (Outcome::Numbers(_), Some(positive)) => {
            return Err(bad(format!(
                "a class called positive ('{positive}') needs an outcome of two classes; '{}' is read as a number (set its kind to yes/no or category if it holds classes)",
                out.name
            )))
        }
        (outcome, None) => outcome,
    };
    match &outcome {
        Outcome::Classes { codes, labels } => {
            let mut counts = vec![0usize; labels.len()];
            for &c in codes {
                counts[c as usize] += 1;
            }
            let present = counts.iter().filter(|&&n| n > 0).count();
            if present < 2 {
                return Err(bad(format!(
                    "the outcome '{}' has only one class ('{}') among the rows with a value: \
                     there is nothing to tell apart. Choose another outcome or add records of \
                     the other class(es)",
                    out.name,
                    labels.first().map_or("", String::as_str)
                )));
            }
            if labels.len() > 2 && labels.len() * 2 > rows.len() {
                return Err(bad(format!(
                    "the outcome '{}' has {} classes for {} rows; most classes would have a \
                     single record. Is it an identifier, or a number that should be a number?",
                    out.name,
                    labels.len(),
                    rows.len()
                )));
            }
        }
        Outcome::Numbers(v) => {
            if v.iter().all(|&x| x == v[0]) {
                return Err(bad(format!(
                    "the outcome '{}' has the same value ({}) in every row: there is nothing to predict",
                    out.name, v[0]
                )));
            }
        }
    }

    let mut predictors = Vec::with_capacity(spec.predictors.len());
    for name in &spec.predictors {
        let c = find(table, name)?;
        if c.name == out.name {
            return Err(bad(format!(
                "'{name}' is the outcome; it cannot also be a predictor"
            )));
        }
        if c.kind == Kind::Text {
            return Err(bad(format!(
                "the predictor '{name}' is free text or an identifier; set its kind to category \
                 if its values are groups, or leave it out"
            )));
        }
        let values = match &c.values {
            Values::Numbers(v) => PredictorValues::Numbers(rows.iter().map(|&r| v[r]).collect()),
            Values::Levels { codes, levels } => PredictorValues::Levels {
                codes: rows.iter().map(|&r| codes[r]).collect(),
                levels: levels.clone(),
            },
        };
        let informative = match &values {
            PredictorValues::Numbers(v) => {
                let mut present = v.iter().filter(|x| !x.is_nan());
                present
                    .next()
                    .is_some_and(|first| present.any(|x| x != first))
            }
            PredictorValues::Levels { codes, .. } => {
                let mut present = codes.iter().filter(|&&x| x != MISSING_CODE);
                present
                    .next()
                    .is_some_and(|first| present.any(|x| x != first))
            }
        };
        if !informative {
            notices.push(format!(
                "the predictor '{name}' has one value (or none) in the rows used; it cannot help and is left out"
            ));
            continue;
        }
        predictors.push(Predictor {
            name: c.name.clone(),
            kind: c.kind,
            values,
            yes_no_labels: c.yes_no_labels.clone(),
        });
    }
    if predictors.is_empty() {
        return Err(bad(
            "there is no usable predictor: choose at least one column with more than one value \
             besides the outcome"
                .into(),
        ));
    }

    let weights = match &spec.weight {
        None => None,
        Some(name) => {
            let c = find(table, name)?;
            let Values::Numbers(v) = &c.values else {
                return Err(bad(format!(
                    "the weight column '{name}' holds text; weights must be numbers"
                )));
            };
            let w: Vec<f64> = rows.iter().map(|&r| v[r]).collect();
            if let Some(i) = w
                .iter()
                .position(|x| x.is_nan() || *x < 0.0 || x.is_infinite())
            {
                return Err(bad(format!(
                    "the weight column '{name}' has a missing, negative or infinite value ({}) \
                     in data row {}; weights must be zero or more",
                    w[i],
                    rows[i] + 1
                )));
            }
            if w.iter().all(|&x| x == 0.0) {
                return Err(bad(format!(
                    "every weight in '{name}' is zero; at least one row must count"
                )));
            }
            Some(w)
        }
    };
    let groups = match &spec.group {
        None => None,
        Some(name) => {
            let c = find(table, name)?;
            let mut index = std::collections::HashMap::new();
            let mut codes = Vec::with_capacity(rows.len());
            for &r in &rows {
                let key = c.display(r).unwrap_or_default();
                let next = index.len() as u32;
                codes.push(*index.entry(key).or_insert(next));
            }
            Some(codes)
        }
    };
    Ok(Design {
        outcome_name: out.name.clone(),
        outcome,
        predictors,
        weights,
        groups,
        rows,
        notices,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::{read_table, ReadOptions};
    use crate::progress::Silent;

    fn table(text: &str) -> Table {
        read_table(text.as_bytes(), &ReadOptions::default(), &mut Silent)
            .unwrap()
            .table
    }

    #[test]
    fn the_class_called_positive_becomes_code_1() {
        use crate::data::{read_table, ReadOptions};
        let text = "x,status,kind\n1,alive,a\n2,dead,b\n3,alive,c\n4,alive,a\n";
        let table = read_table(text.as_bytes(), &ReadOptions::default(), &mut Silent)
            .unwrap()
            .table;
        let mut s = spec("status", &["x"]);
        // By default the later label is the event.
        let d = build_design(&table, &s).unwrap();
        assert_eq!(
            d.outcome,
            Outcome::Classes {
                codes: vec![0, 1, 0, 0],
                labels: vec!["alive".into(), "dead".into()]
            }
        );
        s.positive = Some("alive".into());
        let d = build_design(&table, &s).unwrap();
        assert_eq!(
            d.outcome,
            Outcome::Classes {
                codes: vec![1, 0, 1, 1],
                labels: vec!["dead".into(), "alive".into()]
            }
        );
        s.positive = Some("asleep".into());
        let e = build_design(&table, &s).unwrap_err().to_string();
        assert!(
            e.contains("'asleep', is not among the classes") && e.contains("alive, dead"),
            "{e}"
        );
        let mut three = spec("kind", &["x"]);
        three.positive = Some("a".into());
        let e = build_design(&table, &three).unwrap_err().to_string();
        assert!(e.contains("needs an outcome with two classes"), "{e}");
        let mut number = spec("x", &["kind"]);
        number.positive = Some("1".into());
        let e = build_design(&table, &number).unwrap_err().to_string();
        assert!(e.contains("is read as a number"), "{e}");
    }

    fn spec(outcome: &str, predictors: &[&str]) -> DesignSpec {
        DesignSpec {
            outcome: outcome.into(),
            predictors: predictors.iter().map(|s| s.to_string()).collect(),
            ..DesignSpec::default()
        }
    }

    #[test]
    fn a_binary_outcome_with_a_missing_value() {
        let t = table("y,a,w\nyes,1,1\nno,2,1\n,3,1\nyes,4,2\n");
        let d = build_design(&t, &spec("y", &["a"])).unwrap();
        assert_eq!(d.rows, [0, 1, 3]);
        assert_eq!(
            d.outcome,
            Outcome::Classes {
                codes: vec![1, 0, 1],
                labels: vec!["no".into(), "yes".into()]
            }
        );
        assert!(d.notices[0].contains("1 row(s)"), "{:?}", d.notices);
    }

    #[test]
    fn designs_that_cannot_make_a_model_are_refused() {
        let t = table("y,a,c,w,txt\nyes,1,k,1,q1\nyes,2,k,-1,q2\nyes,3,k,1,q3\n");
        let err = |s: DesignSpec| build_design(&t, &s).unwrap_err().to_string();
        assert!(err(spec("y", &["a"])).contains("only one class"));
        assert!(err(spec("a", &["c"])).contains("no usable predictor"));
        assert!(err(spec("a", &["nope"])).contains("no column named 'nope'"));
        let options = ReadOptions {
            kinds: vec![("txt".into(), Kind::Text)],
            ..ReadOptions::default()
        };
        let with_text = read_table(b"a,txt\n1,q1\n2,q2\n", &options, &mut Silent)
            .unwrap()
            .table;
        assert!(build_design(&with_text, &spec("a", &["txt"]))
            .unwrap_err()
            .to_string()
            .contains("free text"));
        assert!(err(spec("a", &["a"])).contains("cannot also be a predictor"));
        let t2 = table("y,a,w\n1.5,1,1\n2.5,2,-1\n3.5,3,1\n");
        let s = DesignSpec {
            weight: Some("w".into()),
            ..spec("y", &["a"])
        };
        assert!(build_design(&t2, &s)
            .unwrap_err()
            .to_string()
            .contains("data row 2"));
    }

    #[test]
    fn balanced_class_weights_equalise_the_classes() {
        let t = table("y,a\nyes,1\nno,2\nno,3\nno,4\n");
        let d = build_design(&t, &spec("y", &["a"])).unwrap();
        let (s, k) = d.row_statistics(true);
        assert_eq!(k, 2);
        // n / (K n_k): yes 4/(2·1) = 2, no 4/(2·3) = 2/3; each class then weighs 2 in all.
        let yes: f64 = s.chunks(2).map(|c| c[1]).sum();
        let no: f64 = s.chunks(2).map(|c| c[0]).sum();
        assert!(
            (yes - 2.0).abs() < 1e-12 && (no - 2.0).abs() < 1e-12,
            "{yes} {no}"
        );
    }

    #[test]
    fn categories_and_groups() {
        let t = table(
            "ward,x,pid\nCedar,1,p1\nBirch,2,p2\nCedar,3,p1\nAlder,4,p3\nBirch,5,p2\nAlder,6,p3\n",
        );
        let s = DesignSpec {
            group: Some("pid".into()),
            ..spec("ward", &["x"])
        };
        let d = build_design(&t, &s).unwrap();
        let Outcome::Classes { codes, labels } = &d.outcome else {
            panic!()
        };
        assert_eq!(labels, &["Alder", "Birch", "Cedar"]);
        assert_eq!(codes, &[2, 1, 2, 0, 1, 0]);
        assert_eq!(d.groups, Some(vec![0, 1, 0, 2, 1, 2]));
    }
}
