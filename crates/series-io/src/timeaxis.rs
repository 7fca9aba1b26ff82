//! The time axis: numbers or ISO 8601 dates and date-times, and whether its steps are equal.
//!
//! Delay embedding treats consecutive rows as equally spaced in time (Takens 1981), so the
//! reader checks the spacing of the axis and, by [`UnevenSteps`], refuses uneven steps, fills
//! whole missing steps with empty rows, or proceeds treating the rows as equally spaced.

use crate::cell::{Cell, CellProblem, parse_number_with};

/// What the values of the time axis are.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeKind {
    /// Plain numbers (`0, 1, 2` or `1990, 1991`), used as written.
    Number,
    /// ISO 8601 calendar dates (`2020-01-31`), held as days since 1970-01-01.
    Date,
    /// ISO 8601 date-times (`2020-01-31T06:00`, `2020-01-31T06:00:00+02:00`), held as seconds
    /// since 1970-01-01T00:00 UTC; values without a zone are taken as written, values with a
    /// zone are converted to UTC.
    DateTime,
}

impl TimeKind {
    /// The word used in run.json and messages: `number`, `date` or `date-time`.
    pub fn as_str(self) -> &'static str {
        match self {
            TimeKind::Number => "number",
            TimeKind::Date => "date",
            TimeKind::DateTime => "date-time",
        }
    }
}

/// What to do when the time axis has uneven steps.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum UnevenSteps {
    /// Refuse the table ([`InputError::UnevenSteps`](crate::InputError::UnevenSteps)).
    #[default]
    Refuse,
    /// Where a step is a whole multiple of the usual step, insert rows with every series
    /// missing for the skipped time points; other uneven steps are still refused.
    FillGaps,
    /// Proceed, treating the rows as equally spaced (recorded, and noted in the report).
    AsEqual,
}

/// What was found about the time axis of a table.
#[derive(Debug, Clone, PartialEq)]
pub struct TimeAxis {
    /// Column name.
    pub column: String,
    /// Numbers, dates or date-times.
    pub kind: TimeKind,
    /// First time as written in the file.
    pub first: String,
    /// Last time as written in the file.
    pub last: String,
    /// The usual step in words (`1`, `7 days`, `1 month`, `6 hours`).
    pub step: String,
    /// Steps (between consecutive rows of the file) that differ from the usual step.
    pub uneven_steps: usize,
    /// Rows inserted with every series missing by [`UnevenSteps::FillGaps`].
    pub filled_rows: usize,
}

/// One parsed time value: its number on the axis and its calendar parts (dates only).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct TimeValue {
    pub(crate) kind: TimeKind,
    /// Days since 1970-01-01 (dates), seconds since the epoch (date-times) or the number.
    pub(crate) value: f64,
    /// Year, month and day for dates, to recognise monthly and yearly steps.
    pub(crate) ymd: Option<(i64, u32, u32)>,
}

/// Parse one time cell: a number, or an ISO 8601 date or date-time.
pub(crate) fn parse_time(raw: &str, decimal_comma: bool) -> Result<Option<TimeValue>, CellProblem> {
    let text = raw.trim();
    match parse_number_with(text, decimal_comma) {
        Ok(Cell::Missing) => return Ok(None),
        Ok(Cell::Value(value)) => {
            return Ok(Some(TimeValue {
                kind: TimeKind::Number,
                value,
                ymd: None,
            }));
        }
        Err(CellProblem::Infinite) => return Err(CellProblem::Infinite),
        Err(CellProblem::NotNumeric(_)) => {}
    }
    if let Some(v) = parse_iso(text) {
        return Ok(Some(v));
    }
    Err(CellProblem::NotNumeric(
        "A time value must be a number or an ISO 8601 date or date-time such as 2020-01-31, \
         2020-01-31T06:00 or 2020-01-31T06:00:00+02:00 (year first, month, day); rewrite other \
         date styles such as 31/01/2020 in that form"
            .to_string(),
    ))
}

/// `YYYY-MM-DD`, optionally followed by `T` (or one space) and `HH:MM[:SS[.fff]]` and an
/// optional zone `Z`, `+HH:MM`, `+HHMM` or `+HH`.
pub(crate) fn parse_iso(text: &str) -> Option<TimeValue> {
    let b = text.as_bytes();
    if b.len() < 10 || b[4] != b'-' || b[7] != b'-' {
        return None;
    }
    let year: i64 = digits(&text[0..4])?.into();
    let month = digits(&text[5..7])?;
    let day = digits(&text[8..10])?;
    if !(1..=12).contains(&month) || day == 0 || day > days_in_month(year, month) {
        return None;
    }
    let days = days_from_civil(year, month, day);
    if b.len() == 10 {
        return Some(TimeValue {
            kind: TimeKind::Date,
            value: days as f64,
            ymd: Some((year, month, day)),
        });
    }
    if b[10] != b'T' && b[10] != b' ' {
        return None;
    }
    let rest = &text[11..];
    let zone_at = rest.find(['Z', 'z', '+', '-']).unwrap_or(rest.len());
    let (clock, zone) = rest.split_at(zone_at);
    let seconds_of_day = parse_clock(clock)?;
    let offset = parse_zone(zone)?;
    Some(TimeValue {
        kind: TimeKind::DateTime,
        value: days as f64 * 86_400.0 + seconds_of_day - offset,
        ymd: None,
    })
}

fn digits(s: &str) -> Option<u32> {
    if s.is_empty() || !s.bytes().all(|c| c.is_ascii_digit()) {
        return None;
    }
    s.parse().ok()
}

/// `HH:MM`, `HH:MM:SS` or `HH:MM:SS.fff`, as seconds after midnight (24:00 is refused).
fn parse_clock(s: &str) -> Option<f64> {
    let mut parts = s.split(':');
    let h = digits(parts.next()?).filter(|_| true)?;
    let m = digits(parts.next()?)?;
    let sec: f64 = match parts.next() {
        None => 0.0,
        Some(p) => {
            let (whole, frac) = p.split_once('.').unwrap_or((p, ""));
            if whole.len() != 2 || !frac.bytes().all(|c| c.is_ascii_digit()) {
                return None;
            }
            let w = digits(whole)?;
            let f: f64 = if frac.is_empty() {
                0.0
            } else {
                format!("0.{frac}").parse().ok()?
            };
            if w >= 60 {
                return None;
            }
            w as f64 + f
        }
    };
    if parts.next().is_some() || h >= 24 || m >= 60 {
        return None;
    }
    Some(h as f64 * 3600.0 + m as f64 * 60.0 + sec)
}

/// Zone offset east of UTC in seconds: empty (none), `Z`, `+HH`, `+HHMM`, `+HH:MM`.
fn parse_zone(s: &str) -> Option<f64> {
    if s.is_empty() {
        return Some(0.0);
    }
    if s.eq_ignore_ascii_case("z") {
        return Some(0.0);
    }
    let sign = match s.as_bytes()[0] {
        b'+' => 1.0,
        b'-' => -1.0,
        _ => return None,
    };
    let body = s[1..].replace(':', "");
    let (h, m) = match body.len() {
        2 => (digits(&body)?, 0),
        4 => (digits(&body[..2])?, digits(&body[2..])?),
        _ => return None,
    };
    if h > 14 || m >= 60 {
        return None;
    }
    Some(sign * (h as f64 * 3600.0 + m as f64 * 60.0))
}

fn is_leap(y: i64) -> bool {
    (y % 4 == 0 && y % 100 != 0) || y % 400 == 0
}

fn days_in_month(y: i64, m: u32) -> u32 {
    match m {
        1 | 3 | 5 | 7 | 8 | 10 | 12 => 31,
        4 | 6 | 9 | 11 => 30,
        _ if is_leap(y) => 29,
        _ => 28,
    }
}

/// Days since 1970-01-01 in the proleptic Gregorian calendar (the `days_from_civil`
/// algorithm of Hinnant, "chrono-Compatible Low-Level Date Algorithms").
fn days_from_civil(y: i64, m: u32, d: u32) -> i64 {
    let y = if m <= 2 { y - 1 } else { y };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let m = i64::from(m);
    let doy = (153 * (if m > 2 { m - 3 } else { m + 9 }) + 2) / 5 + i64::from(d) - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

/// The spacing of an axis: its usual step and the steps that differ from it.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Spacing {
    /// The usual step in words.
    pub(crate) step: String,
    /// For each step i (between rows i and i+1), how many usual steps it spans: `Some(1)` for
    /// a usual step, `Some(k)` for a whole multiple, `None` for anything else.
    pub(crate) multiples: Vec<Option<usize>>,
    /// Steps as written in words, for messages, indexed like `multiples`.
    step_words: Vec<String>,
}

impl Spacing {
    /// Index of the first step that is not the usual step.
    pub(crate) fn first_uneven(&self) -> Option<usize> {
        self.multiples.iter().position(|m| *m != Some(1))
    }

    /// How many steps are not the usual step.
    pub(crate) fn uneven(&self) -> usize {
        self.multiples.iter().filter(|m| **m != Some(1)).count()
    }

    /// Step `i` in words.
    pub(crate) fn words(&self, i: usize) -> &str {
        &self.step_words[i]
    }
}

/// Find the usual step of an increasing axis (at least two values) and which steps differ.
///
/// Dates step in days, except when every date falls on the same day of the month and the
/// steps are equal in months (monthly or yearly records, whose lengths in days vary).
pub(crate) fn spacing(values: &[TimeValue]) -> Spacing {
    let kind = values[0].kind;
    if kind == TimeKind::Date
        && let Some(s) = monthly_spacing(values)
    {
        return s;
    }
    let steps: Vec<f64> = values.windows(2).map(|w| w[1].value - w[0].value).collect();
    let usual = mode(&steps);
    let words = |d: f64| match kind {
        TimeKind::Number => crate::output::format_f64(d),
        TimeKind::Date => plural(d, "day"),
        TimeKind::DateTime => duration_words(d),
    };
    let multiples = steps
        .iter()
        .map(|&d| {
            let k = (d / usual).round();
            let tol = 1e-9 * usual.abs().max(d.abs());
            (k >= 1.0 && (d - k * usual).abs() <= tol && k < usize::MAX as f64)
                .then_some(k as usize)
        })
        .collect();
    Spacing {
        step: words(usual),
        multiples,
        step_words: steps.iter().map(|&d| words(d)).collect(),
    }
}

/// Monthly spacing: the same day of the month throughout and equal steps in months.
fn monthly_spacing(values: &[TimeValue]) -> Option<Spacing> {
    let ymd: Vec<(i64, u32, u32)> = values.iter().map(|v| v.ymd).collect::<Option<_>>()?;
    let day = ymd[0].2;
    if day > 28 || ymd.iter().any(|&(_, _, d)| d != day) {
        return None;
    }
    let months: Vec<i64> = ymd
        .windows(2)
        .map(|w| (w[1].0 - w[0].0) * 12 + i64::from(w[1].1) - i64::from(w[0].1))
        .collect();
    let as_f: Vec<f64> = months.iter().map(|&m| m as f64).collect();
    let usual = mode(&as_f) as i64;
    if usual < 1 {
        return None;
    }
    let words = |m: i64| {
        if m % 12 == 0 {
            plural((m / 12) as f64, "year")
        } else {
            plural(m as f64, "month")
        }
    };
    Some(Spacing {
        step: words(usual),
        multiples: months
            .iter()
            .map(|&m| (m % usual == 0).then_some((m / usual) as usize))
            .collect(),
        step_words: months.iter().map(|&m| words(m)).collect(),
    })
}

/// The most common value (steps compared to 1e-9 relative), the smallest on ties.
fn mode(steps: &[f64]) -> f64 {
    let mut sorted: Vec<f64> = steps.to_vec();
    sorted.sort_by(f64::total_cmp);
    let (mut best, mut best_n) = (sorted[0], 0usize);
    let mut i = 0;
    while i < sorted.len() {
        let v = sorted[i];
        let mut j = i;
        while j < sorted.len() && (sorted[j] - v).abs() <= 1e-9 * v.abs().max(sorted[j].abs()) {
            j += 1;
        }
        if j - i > best_n {
            best = v;
            best_n = j - i;
        }
        i = j;
    }
    best
}

fn plural(n: f64, unit: &str) -> String {
    let shown = crate::output::format_f64(n);
    if n == 1.0 {
        format!("1 {unit}")
    } else {
        format!("{shown} {unit}s")
    }
}

/// A span of seconds in the largest whole unit (weeks, days, hours, minutes, seconds).
fn duration_words(s: f64) -> String {
    for (unit, len) in [
        ("week", 604_800.0),
        ("day", 86_400.0),
        ("hour", 3_600.0),
        ("minute", 60.0),
    ] {
        if s.abs() >= len && (s / len).fract() == 0.0 {
            return plural(s / len, unit);
        }
    }
    plural(s, "second")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn t(s: &str) -> TimeValue {
        parse_time(s, false).unwrap().unwrap()
    }

    #[test]
    fn epoch_day_numbers() {
        // Unix time of 2000-01-01T00:00Z is 946,684,800 s = 10,957 days (POSIX time, the
        // published value of the Y2K instant).
        assert_eq!(t("1970-01-01").value, 0.0);
        assert_eq!(t("2000-01-01").value, 10_957.0);
        assert_eq!(t("2000-01-01T00:00Z").value, 946_684_800.0);
        // 2009-02-13T23:31:30Z is Unix time 1,234,567,890 (widely published).
        assert_eq!(t("2009-02-13T23:31:30Z").value, 1_234_567_890.0);
        assert_eq!(t("2009-02-14T01:31:30+02:00").value, 1_234_567_890.0);
        assert_eq!(t("2009-02-13 18:31:30-0500").value, 1_234_567_890.0);
        assert_eq!(t("1969-12-31").value, -1.0);
    }

    #[test]
    fn leap_years_follow_the_gregorian_rule() {
        // Gregorian rule: every 4th year, not centuries, except every 400th.
        assert!(parse_iso("2020-02-29").is_some());
        assert!(parse_iso("2000-02-29").is_some());
        assert!(parse_iso("1900-02-29").is_none());
        assert!(parse_iso("2021-02-29").is_none());
        assert!(parse_iso("2021-04-31").is_none());
        assert_eq!(t("2020-03-01").value - t("2020-02-28").value, 2.0);
    }

    #[test]
    fn refuses_other_forms() {
        for s in [
            "31/01/2020",
            "2020-1-31",
            "2020-01-31T25:00",
            "2020-01-31T06",
            "2020-13-01",
        ] {
            assert!(
                matches!(parse_time(s, false), Err(CellProblem::NotNumeric(_))),
                "{s}"
            );
        }
        assert_eq!(t("1990").kind, TimeKind::Number);
        assert_eq!(t("2020-01-31T06:00").kind, TimeKind::DateTime);
        assert_eq!(
            t("2020-01-31T06:00:30.5").value % 86_400.0,
            6.0 * 3600.0 + 30.5
        );
    }

    fn axis(v: &[&str]) -> Spacing {
        spacing(&v.iter().map(|s| t(s)).collect::<Vec<_>>())
    }

    #[test]
    fn usual_steps_in_words() {
        let weekly = axis(&["2020-01-06", "2020-01-13", "2020-01-20", "2020-02-03"]);
        assert_eq!(weekly.step, "7 days");
        assert_eq!(weekly.multiples, [Some(1), Some(1), Some(2)]);
        assert_eq!(weekly.first_uneven(), Some(2));
        let monthly = axis(&["2020-01-15", "2020-02-15", "2020-03-15", "2021-03-15"]);
        assert_eq!(monthly.step, "1 month");
        assert_eq!(monthly.multiples, [Some(1), Some(1), Some(12)]);
        let yearly = axis(&["2019-06-01", "2020-06-01", "2021-06-01"]);
        assert_eq!(yearly.step, "1 year");
        assert_eq!(yearly.uneven(), 0);
        let hourly = axis(&["2020-01-01T00:00", "2020-01-01T06:00", "2020-01-01T12:00"]);
        assert_eq!(hourly.step, "6 hours");
        let numbers = axis(&["0", "0.1", "0.2", "0.30000000000000004", "0.45"]);
        assert_eq!(numbers.step, "0.1");
        assert_eq!(numbers.multiples[..3], [Some(1), Some(1), Some(1)]);
        assert_eq!(numbers.multiples[3], None);
    }
}
