//! Column summaries: kind, missing count and share, distinct count, min / median / max or the
//! most frequent values, and flags for columns that need the user's attention (identifiers,
//! constants, nearly empty columns).

use super::{Column, Kind, Table, Values, MISSING_CODE};

/// Something about a column the user should look at before modelling.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum Flag {
    /// Every value is different: a record number, code or name, not a predictor.
    #[serde(rename = "identifier")]
    Identifier,
    /// Only one distinct value: carries no information.
    #[serde(rename = "constant")]
    Constant,
    /// At least [`MOSTLY_MISSING`] of the values are missing.
    #[serde(rename = "mostly missing")]
    MostlyMissing,
    /// Every value is missing.
    #[serde(rename = "all missing")]
    AllMissing,
}

impl Flag {
    pub fn label(self) -> &'static str {
        match self {
            Flag::Identifier => "identifier",
            Flag::Constant => "constant",
            Flag::MostlyMissing => "mostly missing",
            Flag::AllMissing => "all missing",
        }
    }

    /// What the flag means for the user, in a sentence.
    pub fn advice(self) -> &'static str {
        match self {
            Flag::Identifier => "every value differs: looks like a record identifier; use it as the group/record id or ignore it, never as a predictor",
            Flag::Constant => "only one value: it cannot help a model",
            Flag::MostlyMissing => "almost all values are missing: a model can learn little from it",
            Flag::AllMissing => "no values at all",
        }
    }
}

/// Share of missing values from which a column is flagged as mostly missing (common
/// practice, no source).
pub const MOSTLY_MISSING: f64 = 0.9;

/// One value and how often it occurs.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct TopValue {
    pub value: String,
    pub count: usize,
}

/// What the user sees about one column.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ColumnSummary {
    pub name: String,
    pub kind: Kind,
    pub missing: usize,
    pub missing_share: f64,
    pub distinct: usize,
    pub min: Option<f64>,
    pub median: Option<f64>,
    pub max: Option<f64>,
    /// The most frequent values (labels, or yes/no words), most frequent first.
    pub top: Vec<TopValue>,
    pub unit: Option<String>,
    pub flags: Vec<Flag>,
}

/// A summary statistic (min, median, max) of a column of `kind` as people read it: dates as
/// dates, whole numbers whole, others to four decimals or in scientific form when very
/// large or small.
pub fn format_statistic(kind: Kind, x: f64) -> String {
    match kind {
        Kind::Date => super::format_date(x, false),
        Kind::DateTime => super::format_date(x, true),
        _ if x == x.trunc() && x.abs() < 1e12 => format!("{}", x as i64),
        _ if x.abs() >= 1e6 || x.abs() < 1e-3 => format!("{x:.3e}"),
        _ => {
            let s = format!("{x:.4}");
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        }
    }
}

/// How many frequent values a summary lists.
pub const TOP_VALUES: usize = 5;

/// Summarises every column of `table`.
pub fn summarise(table: &Table) -> Vec<ColumnSummary> {
    table
        .columns
        .iter()
        .map(|c| summarise_column(c, table.rows))
        .collect()
}

pub(crate) fn looks_like_id_name(name: &str) -> bool {
    let lower = name.to_ascii_lowercase();
    let words: Vec<&str> = lower
        .split(|c: char| !c.is_ascii_alphanumeric())
        .filter(|w| !w.is_empty())
        .collect();
    words
        .last()
        .is_some_and(|w| matches!(*w, "id" | "uuid" | "mrn" | "code" | "key" | "no" | "number"))
        || lower.ends_with("id")
            && lower.len() > 2
            && lower[..lower.len() - 2].ends_with(['_', ' ', '-'])
}

/// Summarises one column of a table with `rows` rows.
pub fn summarise_column(column: &Column, rows: usize) -> ColumnSummary {
    let mut s = ColumnSummary {
        name: column.name.clone(),
        kind: column.kind,
        missing: 0,
        missing_share: 0.0,
        distinct: 0,
        min: None,
        median: None,
        max: None,
        top: Vec::new(),
        unit: column.unit.map(str::to_string),
        flags: Vec::new(),
    };
    match &column.values {
        Values::Numbers(values) => {
            let mut present: Vec<f64> = values.iter().copied().filter(|x| !x.is_nan()).collect();
            s.missing = rows - present.len();
            crate::binning::sort_numbers(&mut present);
            if let (Some(&lo), Some(&hi)) = (present.first(), present.last()) {
                s.min = Some(lo);
                s.max = Some(hi);
                let n = present.len();
                s.median = Some(if n % 2 == 1 {
                    present[n / 2]
                } else {
                    0.5 * (present[n / 2 - 1] + present[n / 2])
                });
            }
            s.distinct = present.windows(2).filter(|w| w[0] != w[1]).count()
                + usize::from(!present.is_empty());
            if column.kind == Kind::YesNo {
                let ones = present.iter().filter(|&&x| x != 0.0).count();
                let labels = column
                    .yes_no_labels
                    .clone()
                    .unwrap_or_else(|| ["0".into(), "1".into()]);
                let mut top = vec![
                    TopValue {
                        value: labels[1].clone(),
                        count: ones,
                    },
                    TopValue {
                        value: labels[0].clone(),
                        count: present.len() - ones,
                    },
                ];
                top.retain(|t| t.count > 0);
                top.sort_by_key(|t| std::cmp::Reverse(t.count));
                s.top = top;
            }
            let n = present.len();
            let whole_ids = column.kind == Kind::WholeNumber
                && n >= 20
                && s.distinct == n
                && (looks_like_id_name(&column.name)
                    || s.max
                        .zip(s.min)
                        .is_some_and(|(hi, lo)| hi - lo + 1.0 <= 2.0 * n as f64 && lo >= 0.0));
            if whole_ids {
                s.flags.push(Flag::Identifier);
            }
        }
        Values::Levels { codes, levels } => {
            let mut counts = vec![0usize; levels.len()];
            for &c in codes {
                if c == MISSING_CODE {
                    s.missing += 1;
                } else {
                    counts[c as usize] += 1;
                }
            }
            s.distinct = counts.iter().filter(|&&c| c > 0).count();
            let mut order: Vec<usize> = (0..levels.len()).filter(|&i| counts[i] > 0).collect();
            order.sort_by(|&a, &b| {
                counts[b]
                    .cmp(&counts[a])
                    .then_with(|| levels[a].cmp(&levels[b]))
            });
            s.top = order
                .iter()
                .take(TOP_VALUES)
                .map(|&i| TopValue {
                    value: levels[i].clone(),
                    count: counts[i],
                })
                .collect();
            let n = rows - s.missing;
            if n >= 10 && s.distinct == n
                || (n >= 10 && looks_like_id_name(&column.name) && s.distinct * 10 >= n * 9)
            {
                s.flags.push(Flag::Identifier);
            }
        }
    }
    s.missing_share = if rows == 0 {
        0.0
    } else {
        s.missing as f64 / rows as f64
    };
    if rows > 0 && s.missing == rows {
        s.flags.push(Flag::AllMissing);
    } else if s.missing_share >= MOSTLY_MISSING {
        s.flags.push(Flag::MostlyMissing);
    }
    if s.distinct == 1 {
        s.flags.push(Flag::Constant);
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::{read_table, ReadOptions};
    use crate::progress::Silent;

    fn summary(text: &str) -> Vec<ColumnSummary> {
        summarise(
            &read_table(text.as_bytes(), &ReadOptions::default(), &mut Silent)
                .unwrap()
                .table,
        )
    }

    #[test]
    fn statistics_read_as_people_write_them() {
        assert_eq!(format_statistic(Kind::Number, 2.5), "2.5");
        assert_eq!(format_statistic(Kind::Number, 1.0 / 3.0), "0.3333");
        assert_eq!(format_statistic(Kind::WholeNumber, 42.0), "42");
        assert_eq!(format_statistic(Kind::Number, 12_345_678.9), "1.235e7");
        assert_eq!(format_statistic(Kind::Number, 0.000_25), "2.500e-4");
        assert_eq!(format_statistic(Kind::Date, 19782.0), "2024-02-29");
    }

    #[test]
    fn numbers_get_min_median_max() {
        let s = &summary("x\n3\n1\nNA\n2\n10\n")[0];
        assert_eq!((s.min, s.median, s.max), (Some(1.0), Some(2.5), Some(10.0)));
        assert_eq!((s.missing, s.distinct), (1, 4));
        assert!((s.missing_share - 0.2).abs() < 1e-12);
    }

    #[test]
    fn categories_get_top_values_and_flags() {
        let mut text = String::from("ward,id,c,mostly\n");
        for i in 0..20 {
            let ward = ["Birch", "Cedar", "Birch", "Alder"][i % 4];
            let mostly = if i == 0 { "1" } else { "" };
            text += &format!("{ward},R{i:03},same,{mostly}\n");
        }
        let s = summary(&text);
        assert_eq!(
            s[0].top[0],
            TopValue {
                value: "Birch".into(),
                count: 10
            }
        );
        assert_eq!(s[0].top[1].value, "Alder", "ties broken alphabetically");
        assert_eq!(s[1].flags, [Flag::Identifier]);
        assert_eq!(s[2].flags, [Flag::Constant]);
        assert_eq!(s[3].flags, [Flag::MostlyMissing, Flag::Constant]);
    }
}
