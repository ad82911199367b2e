//! Column builders: one per column, fed cell by cell while a file is read, inferring the
//! column's kind on the way and storing values in their final typed form (no copy of the
//! file's text is kept). A column that starts out numeric and later meets text asks to be
//! read again as labels ([`Builder::needs_second_pass`]); that is rare and costs one more
//! pass over that column only.

use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};

use super::values::{
    parse_date, parse_number, parse_trimmed_number, trim, yes_no_word, DayMonth, MissingTokens,
    NumberStyle,
};
use super::{format_date, format_number, Column, Kind, Values, DATE_UNIT, MISSING_CODE};

/// One cell as a reader delivers it.
#[derive(Debug, Clone, Copy)]
pub enum Cell<'a> {
    Text(&'a str),
    Number(f64),
    Bool(bool),
    /// Days since 1970-01-01; `has_time` when a time of day is part of it.
    Date {
        days: f64,
        has_time: bool,
    },
    Empty,
}

/// How a column is to be read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Plan {
    /// Infer the kind from the values.
    Infer,
    /// The user chose the kind; values that do not fit become missing (and are counted).
    Kind(Kind),
    /// Second pass of a column that mixes numbers and text: read everything as labels.
    Labels,
    /// Second pass of a date column whose values turned out to be month/day/year.
    MonthFirst,
}

/// Limits for the category / text decision: at most this many distinct labels is always a
/// category (common practice, no source).
pub const CATEGORY_MAX_LEVELS: usize = 50;

/// FNV-1a: a fast, simple hash for interning labels (no denial-of-service concern: the data
/// is the user's own).
#[derive(Default)]
pub struct Fnv(u64);

impl Hasher for Fnv {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        let mut h = if self.0 == 0 {
            0xcbf2_9ce4_8422_2325
        } else {
            self.0
        };
        for &b in bytes {
            h = (h ^ b as u64).wrapping_mul(0x0100_0000_01b3);
        }
        self.0 = h;
    }
}

type LabelIndex = HashMap<String, u32, BuildHasherDefault<Fnv>>;

enum State {
    Undecided,
    Numbers(Vec<f64>),
    Dates {
        values: Vec<f64>,
        has_time: bool,
    },
    Levels {
        codes: Vec<u32>,
        index: LabelIndex,
        levels: Vec<String>,
    },
    /// Inference changed its mind; the column must be read again with `second_plan`.
    Again,
}

/// Accumulates one column.
pub struct Builder {
    plan: Plan,
    state: State,
    rows: usize,
    leading_missing: usize,
    capacity: usize,
    style: NumberStyle,
    order: DayMonth,
    first_over_12: bool,
    second_over_12: bool,
    second_plan: Plan,
    /// Values that did not fit a kind the user chose: (count, first row, the text).
    unreadable: usize,
    first_unreadable: Option<(usize, String)>,
    /// For label columns: cells that read as numbers, and the first that did not.
    numeric_labels: usize,
    first_text: Option<(usize, String)>,
}

impl Builder {
    pub fn new(plan: Plan, style: NumberStyle, capacity: usize) -> Self {
        Builder {
            plan,
            state: State::Undecided,
            rows: 0,
            leading_missing: 0,
            capacity,
            style,
            order: if plan == Plan::MonthFirst {
                DayMonth::MonthFirst
            } else {
                DayMonth::DayFirst
            },
            first_over_12: false,
            second_over_12: false,
            second_plan: Plan::Labels,
            unreadable: 0,
            first_unreadable: None,
            numeric_labels: 0,
            first_text: None,
        }
    }

    /// `Some(plan)` when this column must be read again with that plan.
    pub fn needs_second_pass(&self) -> Option<Plan> {
        matches!(self.state, State::Again).then_some(self.second_plan)
    }

    /// Adds the next cell given as text: the common case of a delimited file. Numbers in a
    /// number column take a short path; everything else goes through [`Builder::push`].
    #[inline]
    pub fn push_text(&mut self, text: &str, missing: &MissingTokens) {
        if let State::Numbers(values) = &mut self.state {
            // No default missing token reads as a number, so only the user's own codes
            // (such as -999) must be checked first.
            if !missing.has_extra() {
                if let Some(x) = parse_trimmed_number(trim(text), self.style) {
                    values.push(x);
                    self.rows += 1;
                    return;
                }
            }
        }
        self.push(Cell::Text(text), missing);
    }

    /// Adds the next cell.
    pub fn push(&mut self, cell: Cell<'_>, missing: &MissingTokens) {
        let row = self.rows;
        self.rows += 1;
        let cell = match cell {
            Cell::Text(s) => {
                let s = trim(s);
                if missing.is_missing_trimmed(s) {
                    Cell::Empty
                } else {
                    Cell::Text(s)
                }
            }
            Cell::Bool(b) => Cell::Text(if b { "true" } else { "false" }),
            other => other,
        };
        if matches!(cell, Cell::Empty) {
            self.push_missing();
            return;
        }
        if matches!(self.state, State::Undecided) {
            self.start(&cell);
        }
        match &mut self.state {
            State::Undecided | State::Again => {}
            State::Numbers(values) => {
                let x = match cell {
                    Cell::Number(x) => Some(x),
                    Cell::Text(s) => parse_trimmed_number(s, self.style),
                    _ => None,
                };
                match x {
                    Some(x) => values.push(x),
                    None if self.plan != Plan::Infer => {
                        values.push(f64::NAN);
                        self.note_unreadable(row, cell);
                    }
                    None => self.state = State::Again,
                }
            }
            State::Dates { values, has_time } => {
                let d = match cell {
                    Cell::Date { days, has_time } => Some((days, has_time)),
                    Cell::Text(s) => parse_date(s, self.order).map(|d| {
                        self.first_over_12 |= d.first_over_12;
                        self.second_over_12 |= d.second_over_12;
                        (d.days, d.has_time)
                    }),
                    _ => None,
                };
                let conflicting = self.first_over_12 && self.second_over_12;
                match d {
                    Some(_) if conflicting && self.plan == Plan::Infer => {
                        self.state = State::Again;
                    }
                    Some(_)
                        if self.second_over_12
                            && self.order == DayMonth::DayFirst
                            && self.plan == Plan::Infer =>
                    {
                        self.second_plan = Plan::MonthFirst;
                        self.state = State::Again;
                    }
                    Some((days, t)) => {
                        values.push(days);
                        *has_time |= t;
                    }
                    None if self.plan != Plan::Infer && self.plan != Plan::MonthFirst => {
                        values.push(f64::NAN);
                        self.note_unreadable(row, cell);
                    }
                    None => {
                        let month_first = match cell {
                            Cell::Text(s) => parse_date(s, DayMonth::MonthFirst).is_some(),
                            _ => false,
                        };
                        self.second_plan = if month_first
                            && self.order == DayMonth::DayFirst
                            && !self.first_over_12
                        {
                            Plan::MonthFirst
                        } else {
                            Plan::Labels
                        };
                        self.state = State::Again;
                    }
                }
            }
            State::Levels {
                codes,
                index,
                levels,
            } => {
                let owned;
                let text: &str = match cell {
                    Cell::Text(s) => s,
                    Cell::Number(x) => {
                        owned = format_number(x);
                        &owned
                    }
                    Cell::Date { days, has_time } => {
                        owned = format_date(days, has_time);
                        &owned
                    }
                    Cell::Bool(_) | Cell::Empty => "",
                };
                if self.plan == Plan::Labels {
                    if parse_number(text, self.style).is_some() {
                        self.numeric_labels += 1;
                    } else if self.first_text.is_none() {
                        self.first_text = Some((row, text.to_string()));
                    }
                }
                let code = match index.get(text) {
                    Some(&c) => c,
                    None => {
                        let c = levels.len() as u32;
                        levels.push(text.to_string());
                        index.insert(text.to_string(), c);
                        c
                    }
                };
                codes.push(code);
            }
        }
    }

    fn note_unreadable(&mut self, row: usize, cell: Cell<'_>) {
        self.unreadable += 1;
        if self.first_unreadable.is_none() {
            let text = match cell {
                Cell::Text(s) => s.trim().to_string(),
                Cell::Number(x) => format_number(x),
                Cell::Date { days, has_time } => format_date(days, has_time),
                _ => String::new(),
            };
            self.first_unreadable = Some((row, text));
        }
    }

    fn push_missing(&mut self) {
        match &mut self.state {
            State::Undecided => self.leading_missing += 1,
            State::Numbers(v) | State::Dates { values: v, .. } => v.push(f64::NAN),
            State::Levels { codes, .. } => codes.push(MISSING_CODE),
            State::Again => {}
        }
    }

    /// Chooses the storage when the first non-missing cell arrives.
    fn start(&mut self, cell: &Cell<'_>) {
        let numeric = |plan: Plan| match plan {
            Plan::Kind(k) => Some(matches!(k, Kind::Number | Kind::WholeNumber)),
            _ => None,
        };
        let dated = matches!(
            self.plan,
            Plan::Kind(Kind::Date | Kind::DateTime) | Plan::MonthFirst
        );
        let labels = matches!(
            self.plan,
            Plan::Labels | Plan::Kind(Kind::Category | Kind::Text | Kind::YesNo)
        );
        let as_numbers = numeric(self.plan) == Some(true)
            || (self.plan == Plan::Infer
                && match cell {
                    Cell::Number(_) => true,
                    Cell::Text(s) => parse_number(s, self.style).is_some(),
                    _ => false,
                });
        let as_dates = dated
            || (self.plan == Plan::Infer
                && match cell {
                    Cell::Date { .. } => true,
                    Cell::Text(s) => parse_date(s, self.order).is_some(),
                    _ => false,
                });
        let mut fill = Vec::with_capacity(self.capacity);
        fill.resize(self.leading_missing, f64::NAN);
        self.state = if labels || !(as_numbers || as_dates) {
            let mut codes = Vec::with_capacity(self.capacity);
            codes.resize(self.leading_missing, MISSING_CODE);
            State::Levels {
                codes,
                index: LabelIndex::default(),
                levels: Vec::new(),
            }
        } else if as_numbers {
            State::Numbers(fill)
        } else {
            State::Dates {
                values: fill,
                has_time: false,
            }
        };
    }

    /// Finishes the column. Returns the column and any notices about it.
    pub fn finish(self, name: String) -> (Column, Vec<String>) {
        let mut notices = Vec::new();
        let rows = self.rows;
        let forced = match self.plan {
            Plan::Kind(k) => Some(k),
            _ => None,
        };
        if let Some((row, text)) = &self.first_unreadable {
            notices.push(format!(
                "column '{name}': {} value(s) could not be read as {} and were set to missing \
                 (the first, '{text}', in data row {})",
                self.unreadable,
                forced.map_or("the chosen kind", Kind::label),
                row + 1
            ));
        }
        let mut column = Column {
            name: name.clone(),
            kind: Kind::Number,
            values: Values::Numbers(Vec::new()),
            yes_no_labels: None,
            unit: None,
        };
        match self.state {
            State::Undecided | State::Again => {
                let kind = forced.unwrap_or(Kind::Text);
                column.kind = kind;
                column.values = if kind.is_numeric() {
                    Values::Numbers(vec![f64::NAN; rows])
                } else {
                    Values::Levels {
                        codes: vec![MISSING_CODE; rows],
                        levels: Vec::new(),
                    }
                };
            }
            State::Numbers(values) => {
                let whole = values
                    .iter()
                    .all(|x| x.is_nan() || (x.fract() == 0.0 && x.abs() < 9e15));
                let (mut zero, mut one, mut other) = (false, false, false);
                for &x in &values {
                    if x == 0.0 {
                        zero = true;
                    } else if x == 1.0 {
                        one = true;
                    } else if !x.is_nan() {
                        other = true;
                    }
                }
                column.kind = match forced {
                    Some(k) => k,
                    None if zero && one && !other => Kind::YesNo,
                    None if whole => Kind::WholeNumber,
                    None => Kind::Number,
                };
                if column.kind == Kind::YesNo {
                    column.yes_no_labels = Some(["0".to_string(), "1".to_string()]);
                }
                column.values = Values::Numbers(values);
            }
            State::Dates { values, has_time } => {
                column.kind = forced.unwrap_or(if has_time { Kind::DateTime } else { Kind::Date });
                column.unit = Some(DATE_UNIT);
                if self.plan == Plan::Infer && !self.first_over_12 && !self.second_over_12 {
                    // Only d/m/y forms set these flags; ISO dates are never ambiguous.
                }
                if self.plan == Plan::MonthFirst {
                    notices.push(format!(
                        "column '{name}': dates read as month/day/year (a day above 12 appears \
                         in the second place)"
                    ));
                }
                column.values = Values::Numbers(values);
            }
            State::Levels { codes, levels, .. } => {
                let non_missing = codes.iter().filter(|&&c| c != MISSING_CODE).count();
                let words: Vec<Option<bool>> = levels.iter().map(|l| yes_no_word(l)).collect();
                // Yes/no: every label is a yes/no word (any spelling or case) and both sides occur.
                let is_yes_no_pair = words.iter().all(Option::is_some)
                    && words.contains(&Some(true))
                    && words.contains(&Some(false));
                let kind = match forced {
                    Some(k) => k,
                    None if is_yes_no_pair => Kind::YesNo,
                    None if levels.len() <= CATEGORY_MAX_LEVELS
                        || levels.len() * 2 <= non_missing =>
                    {
                        Kind::Category
                    }
                    None => Kind::Text,
                };
                if self.plan == Plan::Labels {
                    let texts = non_missing - self.numeric_labels;
                    if let Some((row, text)) = &self.first_text {
                        notices.push(format!(
                            "column '{name}' mixes numbers ({}) and text ({texts}), first text \
                             '{text}' in data row {}: it is read as {}. If such text means \
                             'not recorded', add it as a missing-value token; or set the \
                             column's kind to number and text becomes missing",
                            self.numeric_labels,
                            row + 1,
                            kind.label()
                        ));
                    }
                }
                column.kind = kind;
                if kind == Kind::YesNo {
                    match yes_no_codes(&codes, &levels, &words) {
                        Some((values, labels)) => {
                            column.values = Values::Numbers(values);
                            column.yes_no_labels = Some(labels);
                        }
                        None => {
                            notices.push(format!(
                                "column '{name}' has {} distinct values, so it cannot be yes/no; \
                                 it is read as a category",
                                levels.len()
                            ));
                            column.kind = Kind::Category;
                            column.values = Values::Levels { codes, levels };
                        }
                    }
                } else {
                    column.values = Values::Levels { codes, levels };
                }
            }
        }
        (column, notices)
    }
}

/// The columns that must be read again, with fresh builders for them (empty when none).
pub fn second_pass(
    builders: &[Builder],
    style: NumberStyle,
    rows: usize,
) -> (Vec<usize>, Vec<Builder>) {
    builders
        .iter()
        .enumerate()
        .filter_map(|(i, b)| {
            b.needs_second_pass()
                .map(|plan| (i, Builder::new(plan, style, rows)))
        })
        .unzip()
}

/// Puts the second-pass builders in place of the first ones.
pub fn replace(builders: &mut [Builder], columns: Vec<usize>, second: Vec<Builder>) {
    for (col, builder) in columns.into_iter().zip(second) {
        builders[col] = builder;
    }
}

/// Maps a two-label column to 0/1: yes-words to 1 when the labels are such words, otherwise
/// the labels in sorted order (first = 0).
fn yes_no_codes(
    codes: &[u32],
    levels: &[String],
    words: &[Option<bool>],
) -> Option<(Vec<f64>, [String; 2])> {
    let all_words = words.iter().all(Option::is_some);
    if levels.len() > 2 && !all_words {
        return None;
    }
    let mut one_of = vec![false; levels.len()];
    if all_words && words.contains(&Some(true)) && words.contains(&Some(false)) {
        for (i, w) in words.iter().enumerate() {
            one_of[i] = *w == Some(true);
        }
    } else if levels.len() == 2 {
        one_of[1] = levels[1] > levels[0];
        one_of[0] = !one_of[1];
    } else if levels.len() == 1 {
        one_of[0] = words[0] != Some(false);
    }
    // Each side is labelled with its most frequent spelling.
    let mut counts = vec![0usize; levels.len()];
    for &c in codes {
        if c != MISSING_CODE {
            counts[c as usize] += 1;
        }
    }
    let mut labels = [String::from("0"), String::from("1")];
    let mut best = [0usize; 2];
    for (i, l) in levels.iter().enumerate() {
        let side = one_of[i] as usize;
        if counts[i] > best[side] || labels[side].len() == 1 && best[side] == 0 {
            best[side] = counts[i];
            labels[side] = l.clone();
        }
    }
    let values = codes
        .iter()
        .map(|&c| {
            if c == MISSING_CODE {
                f64::NAN
            } else {
                one_of[c as usize] as u8 as f64
            }
        })
        .collect();
    Some((values, labels))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn build(cells: &[&str], plan: Plan) -> (Column, Vec<String>, Option<Plan>) {
        let missing = MissingTokens::new(&[]);
        let mut b = Builder::new(plan, NumberStyle::POINT, 0);
        for c in cells {
            b.push(Cell::Text(c), &missing);
        }
        let again = b.needs_second_pass();
        let (col, notes) = b.finish("x".into());
        (col, notes, again)
    }

    #[test]
    fn kinds_are_inferred() {
        let kind = |cells: &[&str]| build(cells, Plan::Infer).0.kind;
        assert_eq!(kind(&["1.5", "", "2"]), Kind::Number);
        assert_eq!(kind(&["NA", "1", "2", "7"]), Kind::WholeNumber);
        assert_eq!(kind(&["0", "1", "1"]), Kind::YesNo);
        assert_eq!(
            kind(&["Yes", "no", "NO"]),
            Kind::YesNo,
            "spellings may differ"
        );
        assert_eq!(kind(&["yes", "yes", "maybe"]), Kind::Category);
        assert_eq!(kind(&["yes", "no", "no"]), Kind::YesNo);
        assert_eq!(kind(&["2024-01-01", "2024-02-01"]), Kind::Date);
        assert_eq!(kind(&["2024-01-01 10:00", "2024-02-01"]), Kind::DateTime);
        assert_eq!(kind(&["red", "blue", "red"]), Kind::Category);
    }

    #[test]
    fn text_after_numbers_asks_for_a_second_pass() {
        let (_, _, again) = build(&["1", "2", "lots"], Plan::Infer);
        assert_eq!(again, Some(Plan::Labels));
        let (col, notes, _) = build(&["1", "2", "lots"], Plan::Labels);
        assert_eq!(col.kind, Kind::Category);
        assert!(notes[0].contains("mixes numbers"), "{notes:?}");
        let (_, _, again) = build(&["01/02/2024", "03/25/2024"], Plan::Infer);
        assert_eq!(again, Some(Plan::MonthFirst));
        let (col, _, _) = build(&["01/02/2024", "03/25/2024"], Plan::MonthFirst);
        assert_eq!(col.values, Values::Numbers(vec![19724.0, 19807.0]));
    }

    #[test]
    fn chosen_kinds_turn_misfits_into_missing() {
        let (col, notes, _) = build(&["1", "oops", "3"], Plan::Kind(Kind::Number));
        assert!(col.values.is_missing(1));
        assert!(notes[0].contains("'oops'"), "{notes:?}");
        let (col, _, _) = build(&["1", "2"], Plan::Kind(Kind::Category));
        assert_eq!(
            col.values,
            Values::Levels {
                codes: vec![0, 1],
                levels: vec!["1".into(), "2".into()]
            }
        );
        let (col, _, _) = build(&["pos", "neg", ""], Plan::Kind(Kind::YesNo));
        assert_eq!(
            col.yes_no_labels,
            Some(["neg".to_string(), "pos".to_string()])
        );
    }
}
