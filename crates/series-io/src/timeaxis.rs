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

/// One parsed time value: its kind and its number on the axis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct TimeValue {
    pub(crate) kind: TimeKind,
    /// Days since 1970-01-01 (dates), seconds since the epoch (date-times) or the number.
    pub(crate) value: f64,
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
    /// Each step in `unit`s, indexed like `multiples` (put in words only for a message, so
    /// that a long axis holds one number per step rather than one string).
    steps: Vec<f64>,
    unit: StepUnit,
}

/// What the numbers of [`Spacing::steps`] count.
#[derive(Debug, Clone, Copy, PartialEq)]
enum StepUnit {
    Number,
    Days,
    Seconds,
    Months,
}

impl StepUnit {
    fn words(self, d: f64) -> String {
        match self {
            StepUnit::Number => crate::output::format_f64(d),
            StepUnit::Days => plural(d, "day"),
            StepUnit::Seconds => duration_words(d),
            StepUnit::Months if d % 12.0 == 0.0 => plural(d / 12.0, "year"),
            StepUnit::Months => plural(d, "month"),
        }
    }
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
    pub(crate) fn words(&self, i: usize) -> String {
        self.unit.words(self.steps[i])
    }
}

/// Find the usual step of an increasing axis (at least two values, all of one `kind`) and
/// which steps differ.
///
/// Dates step in days, except when every date falls on the same day of the month and the
/// steps are equal in months (monthly or yearly records, whose lengths in days vary).
pub(crate) fn spacing(values: &[f64], kind: TimeKind) -> Spacing {
    if kind == TimeKind::Date
        && let Some(s) = monthly_spacing(values)
    {
        return s;
    }
    let steps: Vec<f64> = values.windows(2).map(|w| w[1] - w[0]).collect();
    let usual = mode(&steps);
    let unit = match kind {
        TimeKind::Number => StepUnit::Number,
        TimeKind::Date => StepUnit::Days,
        TimeKind::DateTime => StepUnit::Seconds,
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
        step: unit.words(usual),
        multiples,
        steps,
        unit,
    }
}

/// Monthly spacing of dates (days since 1970-01-01): the same day of the month throughout and
/// equal steps in months.
fn monthly_spacing(days: &[f64]) -> Option<Spacing> {
    let day = civil_from_days(days[0] as i64).2;
    if day > 28 {
        return None;
    }
    let mut months = Vec::with_capacity(days.len().saturating_sub(1));
    let mut prev: Option<i64> = None;
    for &d in days {
        let (y, m, dd) = civil_from_days(d as i64);
        if dd != day {
            return None;
        }
        let index = y * 12 + i64::from(m);
        if let Some(p) = prev {
            months.push((index - p) as f64);
        }
        prev = Some(index);
    }
    let usual = mode(&months) as i64;
    if usual < 1 {
        return None;
    }
    Some(Spacing {
        step: StepUnit::Months.words(usual as f64),
        multiples: months
            .iter()
            .map(|&m| {
                let m = m as i64;
                (m % usual == 0).then_some((m / usual) as usize)
            })
            .collect(),
        steps: months,
        unit: StepUnit::Months,
    })
}

/// The calendar date of a day number (days since 1970-01-01, proleptic Gregorian): the
/// `civil_from_days` algorithm of Hinnant, "chrono-Compatible Low-Level Date Algorithms".
pub(crate) fn civil_from_days(z: i64) -> (i64, u32, u32) {
    let z = z + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let month = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    (yoe + era * 400 + i64::from(month <= 2), month, day)
}

/// A time value as ISO 8601 (dates, and date-times in UTC with a `Z`) or as a number, for
/// messages about rows whose text is no longer held.
pub(crate) fn format_time(value: f64, kind: TimeKind) -> String {
    match kind {
        TimeKind::Number => crate::output::format_f64(value),
        TimeKind::Date => {
            let (y, m, d) = civil_from_days(value as i64);
            format!("{y:04}-{m:02}-{d:02}")
        }
        TimeKind::DateTime => {
            let days = (value / 86_400.0).floor();
            let (y, m, d) = civil_from_days(days as i64);
            let secs = value - days * 86_400.0;
            let (h, mi) = ((secs / 3600.0).floor(), ((secs % 3600.0) / 60.0).floor());
            let sec = secs - h * 3600.0 - mi * 60.0;
            let sec = if sec.fract() == 0.0 {
                format!("{:02}", sec as u32)
            } else {
                format!("{sec:06.3}")
            };
            format!(
                "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{sec}Z",
                h as u32, mi as u32
            )
        }
    }
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
        let values: Vec<TimeValue> = v.iter().map(|s| t(s)).collect();
        let numbers: Vec<f64> = values.iter().map(|v| v.value).collect();
        spacing(&numbers, values[0].kind)
    }

    #[test]
    fn day_numbers_and_formatted_times_round_trip() {
        // Hinnant's civil_from_days inverts days_from_civil; checked on the published
        // instants of the test above and on leap days.
        for s in [
            "1970-01-01",
            "2000-02-29",
            "1969-12-31",
            "2020-03-01",
            "1900-03-01",
        ] {
            assert_eq!(format_time(t(s).value, TimeKind::Date), s);
        }
        assert_eq!(
            format_time(t("2009-02-14T01:31:30+02:00").value, TimeKind::DateTime),
            "2009-02-13T23:31:30Z"
        );
        assert_eq!(
            format_time(t("2020-01-31T06:00:30.5").value, TimeKind::DateTime),
            "2020-01-31T06:00:30.500Z"
        );
        assert_eq!(format_time(1990.0, TimeKind::Number), "1990");
        let sp = axis(&["2020-01-15", "2020-02-15", "2021-02-15"]);
        assert_eq!(
            (sp.words(0), sp.words(1)),
            ("1 month".into(), "1 year".into())
        );
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
