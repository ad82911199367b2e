//! Reading single cell values: numbers (with a decimal point or comma, optional thousands
//! separators), dates and date-times (turned into days since 1970-01-01), yes/no words and
//! missing-value tokens. Pure functions on `&str`; the column builders call them per cell.

/// How numbers are written in a file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct NumberStyle {
    /// `b'.'` or `b','`.
    pub decimal: u8,
    /// Digit-group separator accepted between groups of three digits, if any.
    pub thousands: Option<u8>,
}

impl NumberStyle {
    pub const POINT: NumberStyle = NumberStyle {
        decimal: b'.',
        thousands: Some(b','),
    };
    pub const COMMA: NumberStyle = NumberStyle {
        decimal: b',',
        thousands: Some(b'.'),
    };
}

const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Parses a number written in `style`. Returns `None` for anything that is not a plain
/// finite number (text, "inf", "1e999", badly grouped digits such as "1,23,4").
///
/// ```
/// use spinney_core::data::values::{parse_number, NumberStyle};
/// assert_eq!(parse_number("3,5", NumberStyle::COMMA), Some(3.5));
/// assert_eq!(parse_number("1,234,567.5", NumberStyle::POINT), Some(1234567.5));
/// assert_eq!(parse_number("12 apples", NumberStyle::POINT), None);
/// ```
pub fn parse_number(text: &str, style: NumberStyle) -> Option<f64> {
    parse_trimmed_number(trim(text), style)
}

/// Trims spaces, fast for ASCII and correct for any Unicode white space (such as the
/// no-break spaces spreadsheet exports leave around numbers).
pub fn trim(text: &str) -> &str {
    let t = text.trim_ascii();
    match (t.as_bytes().first(), t.as_bytes().last()) {
        (Some(a), Some(b)) if !a.is_ascii() || !b.is_ascii() => t.trim(),
        _ => t,
    }
}

/// [`parse_number`] for text already trimmed with [`trim`].
pub fn parse_trimmed_number(s: &str, style: NumberStyle) -> Option<f64> {
    let s = s.as_bytes();
    // Fast path for the common form: optional minus, digits, optional decimal mark and
    // digits; at most 15 significant digits, so the result is exact (Clinger 1990).
    let (neg, body) = match s.first() {
        Some(b'-') => (true, &s[1..]),
        _ => (false, s),
    };
    let mut m: u64 = 0;
    let mut i = 0;
    while i < body.len() && body[i].is_ascii_digit() {
        m = m.wrapping_mul(10).wrapping_add((body[i] - b'0') as u64);
        i += 1;
    }
    let int_digits = i;
    let mut frac = 0;
    if i < body.len() && body[i] == style.decimal {
        i += 1;
        let start = i;
        while i < body.len() && body[i].is_ascii_digit() {
            m = m.wrapping_mul(10).wrapping_add((body[i] - b'0') as u64);
            i += 1;
        }
        frac = i - start;
    }
    if i == body.len() && int_digits + frac > 0 && int_digits + frac <= 15 {
        let v = m as f64 / POW10[frac];
        return Some(if neg { -v } else { v });
    }
    parse_general(s, style)
}

fn parse_general(s: &[u8], style: NumberStyle) -> Option<f64> {
    let (negative, body) = match s.first()? {
        b'-' => (true, &s[1..]),
        b'+' => (false, &s[1..]),
        _ => (false, s),
    };
    // Integer part: digits, possibly grouped by the thousands separator.
    let mut i = 0;
    let mut mantissa: u64 = 0;
    let mut digits = 0usize; // significant digits folded into `mantissa`
    let mut dropped = 0i32; // integer digits beyond what `mantissa` can hold
    let mut group_len: Option<usize> = None; // digits since the last separator
    let mut first_group = 0usize;
    while i < body.len() {
        let b = body[i];
        if b.is_ascii_digit() {
            if digits < 19 {
                mantissa = mantissa * 10 + (b - b'0') as u64;
                if mantissa > 0 {
                    digits += 1;
                }
            } else {
                dropped += 1;
            }
            match group_len.as_mut() {
                Some(n) => *n += 1,
                None => first_group += 1,
            }
            i += 1;
        } else if Some(b) == style.thousands && b != style.decimal {
            // A separator must follow 1..=3 digits and close a group of exactly three.
            match group_len {
                None if (1..=3).contains(&first_group) => {}
                Some(3) => {}
                _ => return None,
            }
            group_len = Some(0);
            i += 1;
        } else {
            break;
        }
    }
    if matches!(group_len, Some(n) if n != 3) {
        return None;
    }
    let int_digits = first_group + group_len.unwrap_or(0);
    let mut exponent: i32 = dropped;
    let mut frac_digits = 0usize;
    if i < body.len() && body[i] == style.decimal {
        i += 1;
        while i < body.len() && body[i].is_ascii_digit() {
            if digits < 19 {
                mantissa = mantissa * 10 + (body[i] - b'0') as u64;
                if mantissa > 0 {
                    digits += 1;
                }
                exponent -= 1;
            }
            frac_digits += 1;
            i += 1;
        }
    }
    if int_digits + frac_digits == 0 {
        return None;
    }
    if i < body.len() && (body[i] == b'e' || body[i] == b'E') {
        i += 1;
        let (exp_negative, start) = match body.get(i) {
            Some(b'-') => (true, i + 1),
            Some(b'+') => (false, i + 1),
            _ => (false, i),
        };
        let mut e: i32 = 0;
        let mut j = start;
        while j < body.len() && body[j].is_ascii_digit() {
            e = e.saturating_mul(10).saturating_add((body[j] - b'0') as i32);
            j += 1;
        }
        if j == start {
            return None;
        }
        exponent = exponent.saturating_add(if exp_negative { -e } else { e });
        i = j;
    }
    if i != body.len() {
        return None;
    }
    // Clinger's fast path: exact when the mantissa and the power of ten are both exact.
    let value = if mantissa < (1u64 << 53) && (-22..=22).contains(&exponent) {
        let m = mantissa as f64;
        if exponent < 0 {
            m / POW10[(-exponent) as usize]
        } else {
            m * POW10[exponent as usize]
        }
    } else {
        slow_parse(negative, body, style)?
    };
    let value = if negative { -value } else { value };
    value.is_finite().then_some(value)
}

/// Correctly rounded fallback through the standard library for long or extreme numbers.
fn slow_parse(_negative: bool, body: &[u8], style: NumberStyle) -> Option<f64> {
    let mut plain = String::with_capacity(body.len());
    for &b in body {
        if Some(b) == style.thousands && b != style.decimal {
            continue;
        }
        plain.push(if b == style.decimal { '.' } else { b as char });
    }
    plain.parse::<f64>().ok()
}

/// The order of day and month in slash- or dot-separated dates.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DayMonth {
    DayFirst,
    MonthFirst,
}

/// A date or date-time read from text.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DateValue {
    /// Days since 1970-01-01 00:00, fractional when a time of day is given.
    pub days: f64,
    pub has_time: bool,
    /// For `d/m/y` forms: whether the first part exceeds 12 (so it must be the day), or the
    /// second does (so the first must be the month).
    pub first_over_12: bool,
    pub second_over_12: bool,
}

/// Days from 1970-01-01 to the given proleptic Gregorian date (Howard Hinnant's
/// `days_from_civil` algorithm).
pub fn days_from_civil(year: i64, month: u32, day: u32) -> i64 {
    let y = if month <= 2 { year - 1 } else { year };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let m = month as i64;
    let doy = (153 * (if m > 2 { m - 3 } else { m + 9 }) + 2) / 5 + day as i64 - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146097 + doe - 719468
}

fn days_in_month(year: i64, month: u32) -> u32 {
    match month {
        1 | 3 | 5 | 7 | 8 | 10 | 12 => 31,
        4 | 6 | 9 | 11 => 30,
        _ if (year % 4 == 0 && year % 100 != 0) || year % 400 == 0 => 29,
        _ => 28,
    }
}

fn number_of(s: &str, min_len: usize, max_len: usize) -> Option<u32> {
    if s.len() < min_len || s.len() > max_len || !s.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    s.parse().ok()
}

/// Parses `hh:mm`, `hh:mm:ss` or `hh:mm:ss.fff` (optionally followed by `Z`) into a fraction
/// of a day.
fn parse_time(s: &str) -> Option<f64> {
    let s = s.strip_suffix('Z').unwrap_or(s);
    let mut parts = s.split(':');
    let h = number_of(parts.next()?, 1, 2)?;
    let m = number_of(parts.next()?, 2, 2)?;
    let secs = match parts.next() {
        None => 0.0,
        Some(sec) => {
            let (whole, frac) = sec.split_once('.').unwrap_or((sec, ""));
            let whole = number_of(whole, 2, 2)? as f64;
            if !frac.bytes().all(|b| b.is_ascii_digit()) {
                return None;
            }
            let frac = if frac.is_empty() {
                0.0
            } else {
                format!("0.{frac}").parse().ok()?
            };
            whole + frac
        }
    };
    if parts.next().is_some() || h > 23 || m > 59 || secs >= 61.0 {
        return None;
    }
    Some((h as f64 * 3600.0 + m as f64 * 60.0 + secs) / 86400.0)
}

/// Parses ISO dates (`2024-03-05`, `2024-03-05 14:30`, `2024-03-05T14:30:00Z`) and
/// day/month/year or month/day/year dates with `/`, `.` or `-` (`25/12/2024`), the latter
/// read in the order `order`.
///
/// ```
/// use spinney_core::data::values::{parse_date, DayMonth};
/// assert_eq!(parse_date("1970-01-02", DayMonth::DayFirst).unwrap().days, 1.0);
/// assert_eq!(parse_date("02/01/1970 12:00", DayMonth::DayFirst).unwrap().days, 1.5);
/// assert!(parse_date("2024-02-30", DayMonth::DayFirst).is_none());
/// ```
pub fn parse_date(text: &str, order: DayMonth) -> Option<DateValue> {
    let s = text.trim();
    if s.len() < 8 || !s.as_bytes()[0].is_ascii_digit() {
        return None;
    }
    let (date_part, time_part) = match s.find(['T', ' ']) {
        Some(at) => (&s[..at], Some(s[at + 1..].trim_start())),
        None => (s, None),
    };
    let sep = date_part
        .bytes()
        .find(|b| matches!(b, b'-' | b'/' | b'.'))?;
    let mut pieces = date_part.split(sep as char);
    let (a, b, c) = (pieces.next()?, pieces.next()?, pieces.next()?);
    if pieces.next().is_some() {
        return None;
    }
    let (mut first_over_12, mut second_over_12) = (false, false);
    let (year, month, day) = if a.len() == 4 {
        (
            number_of(a, 4, 4)? as i64,
            number_of(b, 1, 2)?,
            number_of(c, 1, 2)?,
        )
    } else {
        let (x, y, year) = (
            number_of(a, 1, 2)?,
            number_of(b, 1, 2)?,
            number_of(c, 4, 4)?,
        );
        first_over_12 = x > 12;
        second_over_12 = y > 12;
        match order {
            DayMonth::DayFirst => (year as i64, y, x),
            DayMonth::MonthFirst => (year as i64, x, y),
        }
    };
    if !(1..=12).contains(&month) || day == 0 || day > days_in_month(year, month) {
        return None;
    }
    let mut days = days_from_civil(year, month, day) as f64;
    let has_time = match time_part {
        Some(t) if !t.is_empty() => {
            days += parse_time(t)?;
            true
        }
        _ => false,
    };
    Some(DateValue {
        days,
        has_time,
        first_over_12,
        second_over_12,
    })
}

/// The missing-value tokens every file gets, compared case-insensitively after trimming.
pub const DEFAULT_MISSING: [&str; 9] = ["", "na", "n/a", "nan", "null", "none", ".", "?", "#n/a"];

/// Recognises missing-value tokens: the defaults plus the user's own (exact after trimming).
#[derive(Debug, Clone)]
pub struct MissingTokens {
    extra: Vec<String>,
}

impl MissingTokens {
    pub fn new(extra: &[String]) -> Self {
        MissingTokens {
            extra: extra.iter().map(|t| t.trim().to_string()).collect(),
        }
    }

    /// Whether the user gave codes of their own besides the defaults.
    pub fn has_extra(&self) -> bool {
        !self.extra.is_empty()
    }

    pub fn is_missing(&self, text: &str) -> bool {
        self.is_missing_trimmed(trim(text))
    }

    /// [`MissingTokens::is_missing`] for text already trimmed with [`trim`].
    pub fn is_missing_trimmed(&self, t: &str) -> bool {
        if t.len() <= 4 && DEFAULT_MISSING.iter().any(|m| t.eq_ignore_ascii_case(m)) {
            return true;
        }
        !self.extra.is_empty() && self.extra.iter().any(|m| m == t)
    }
}

/// Reads a yes/no word: `Some(true)` for yes / y / true / t, `Some(false)` for no / n / false /
/// f, case-insensitively.
pub fn yes_no_word(text: &str) -> Option<bool> {
    const YES: [&str; 4] = ["yes", "y", "true", "t"];
    const NO: [&str; 4] = ["no", "n", "false", "f"];
    let t = text.trim();
    if YES.iter().any(|w| t.eq_ignore_ascii_case(w)) {
        Some(true)
    } else if NO.iter().any(|w| t.eq_ignore_ascii_case(w)) {
        Some(false)
    } else {
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_match_the_standard_library() {
        // Reference: Rust's core float parser (correctly rounded, IEEE 754 round-to-nearest).
        for s in [
            "0",
            "-0.5",
            "3.14159",
            "1e10",
            "2.5E-3",
            "123456789012345678901234",
            "0.1",
            "9007199254740993",
            "1.7976931348623157e308",
            "4.9e-324",
            ".5",
            "5.",
            "+7",
            "0.000001234",
            "123.456e-7",
        ] {
            let ours = parse_number(s, NumberStyle::POINT).unwrap();
            let std: f64 = s.parse().unwrap();
            assert_eq!(ours.to_bits(), std.to_bits(), "{s}");
        }
    }

    #[test]
    fn number_styles() {
        let check = |s: &str, style: NumberStyle, want: Option<f64>| {
            assert_eq!(parse_number(s, style), want, "{s:?}");
        };
        check("3,5", NumberStyle::COMMA, Some(3.5));
        check("1.234,5", NumberStyle::COMMA, Some(1234.5));
        check("1.234.567", NumberStyle::COMMA, Some(1234567.0));
        check("1,234,567", NumberStyle::POINT, Some(1234567.0));
        check(" -12 ", NumberStyle::POINT, Some(-12.0));
        for bad in [
            "1,23,4", "12,34", "abc", "", "-", ".", "1e", "inf", "NaN", "1e999", "1..2",
        ] {
            check(bad, NumberStyle::POINT, None);
        }
        check("3,5", NumberStyle::POINT, None);
        check("3.5", NumberStyle::COMMA, None);
    }

    #[test]
    fn dates() {
        // Day counts checked against Python's datetime.date(...).toordinal() - 719163.
        let d = |s: &str, order| parse_date(s, order).map(|v| v.days);
        assert_eq!(d("2000-03-01", DayMonth::DayFirst), Some(11017.0));
        assert_eq!(d("1969-12-31", DayMonth::DayFirst), Some(-1.0));
        assert_eq!(d("2024-02-29", DayMonth::DayFirst), Some(19782.0));
        assert_eq!(d("25/12/2024", DayMonth::DayFirst), Some(20082.0));
        assert_eq!(d("12/25/2024", DayMonth::MonthFirst), Some(20082.0));
        assert_eq!(d("25.12.2024", DayMonth::DayFirst), Some(20082.0));
        assert_eq!(
            d("2024-03-05 14:30", DayMonth::DayFirst),
            Some(19787.0 + 14.5 / 24.0)
        );
        assert_eq!(
            d("2024-03-05T06:00:00Z", DayMonth::DayFirst),
            Some(19787.25)
        );
        for bad in [
            "2023-02-29",
            "2024-13-01",
            "12/25/2024",
            "1234",
            "2024-01-01 25:00",
            "3.5",
        ] {
            assert_eq!(d(bad, DayMonth::DayFirst), None, "{bad}");
        }
        assert!(
            parse_date("25/12/2024", DayMonth::DayFirst)
                .unwrap()
                .first_over_12
        );
    }

    #[test]
    fn missing_and_yes_no() {
        let m = MissingTokens::new(&["-999".to_string()]);
        for t in [
            "", " ", "NA", "n/a", "NaN", "NULL", ".", "?", "-999", "None", "#N/A",
        ] {
            assert!(m.is_missing(t), "{t:?}");
        }
        for t in ["0", "-99", "nap", "missing"] {
            assert!(!m.is_missing(t), "{t:?}");
        }
        assert_eq!(yes_no_word(" Yes"), Some(true));
        assert_eq!(yes_no_word("F"), Some(false));
        assert_eq!(yes_no_word("maybe"), None);
    }
}
