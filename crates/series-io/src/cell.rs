//! Parsing one numeric cell, and explaining why a cell is not a number.

/// What a numeric cell holds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Cell {
    /// Empty, `NA`, `NaN` or `null` (any case).
    Missing,
    /// A finite number.
    Value(f64),
}

/// Why a cell could not be used.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum CellProblem {
    /// Not a number; the string is a hint with the fix.
    NotNumeric(String),
    /// Parses, but to an infinite value.
    Infinite,
}

/// Spellings of a missing value, compared without regard to case.
pub const MISSING_TOKENS: [&str; 4] = ["", "na", "nan", "null"];

pub(crate) fn is_missing(text: &str) -> bool {
    MISSING_TOKENS.iter().any(|t| text.eq_ignore_ascii_case(t))
}

/// Parse a cell that should hold a number (surrounding spaces are ignored).
pub(crate) fn parse_number(raw: &str) -> Result<Cell, CellProblem> {
    parse_number_with(raw, false)
}

/// Parse a number; with `decimal_comma`, the decimal separator is a comma (`3,25`) and a
/// point is refused, since in such files a point is a thousands separator (`1.234,5`).
pub(crate) fn parse_number_with(raw: &str, decimal_comma: bool) -> Result<Cell, CellProblem> {
    let text = raw.trim();
    if is_missing(text) {
        return Ok(Cell::Missing);
    }
    let parsed = if decimal_comma {
        if text.contains('.') {
            return Err(CellProblem::NotNumeric(comma_mode_hint(text)));
        }
        text.replacen(',', ".", 1).parse::<f64>()
    } else {
        text.parse::<f64>()
    };
    match parsed {
        Ok(v) if v.is_nan() => Ok(Cell::Missing),
        Ok(v) if v.is_infinite() => Err(CellProblem::Infinite),
        Ok(v) => Ok(Cell::Value(v)),
        Err(_) if decimal_comma && looks_like_date(text) => {
            Err(CellProblem::NotNumeric(hint_for(text)))
        }
        Err(_) if decimal_comma => Err(CellProblem::NotNumeric(format!(
            "With --decimal-comma, numbers are written like 3,25 or -1,5e-3. {FIX}"
        ))),
        Err(_) => Err(CellProblem::NotNumeric(hint_for(text))),
    }
}

fn comma_mode_hint(text: &str) -> String {
    if text.contains(',') {
        "With --decimal-comma a point can only be a thousands separator (1.234,5); remove the \
         points (1234,5)"
            .to_string()
    } else {
        "With --decimal-comma the decimal separator is a comma (3,25); this cell uses a point. \
         Leave out --decimal-comma if the file's numbers use points"
            .to_string()
    }
}

const FIX: &str = "Write a plain decimal number such as 3.25 or -1.5e-3, or leave the cell empty \
                   or write NA to mark it missing";

/// Guess why `text` failed to parse and say how to fix it.
pub(crate) fn hint_for(text: &str) -> String {
    if let Some(sep) = grouping_separator(text) {
        let shown = match sep {
            ',' => "a comma".to_string(),
            ' ' => "a space".to_string(),
            '\u{a0}' | '\u{202f}' => "a non-breaking space".to_string(),
            '\'' => "an apostrophe".to_string(),
            '_' => "an underscore".to_string(),
            other => format!("{other:?}"),
        };
        let also = if sep == ',' {
            " (if the comma is a decimal comma instead, replace it with a point)"
        } else {
            ""
        };
        return format!(
            "It looks like a number with {shown} as thousands separator; remove the separators \
             (1,234.5 becomes 1234.5){also}. Set the spreadsheet's export to plain numbers"
        );
    }
    if is_decimal_comma(text) {
        return "It looks like a number with a decimal comma: pass --decimal-comma to read \
                commas as decimal separators, or use a point (3,25 becomes 3.25), for example \
                by exporting with an English number format"
            .to_string();
    }
    if looks_like_date(text) {
        return "It looks like a date or clock time, which only the time axis may hold: name \
                that column `date` or `time` (or pass --time-column NAME), write dates in ISO \
                8601 form (2020-01-31 or 2020-01-31T06:00), or give time as a number such as \
                days or seconds since the start"
            .to_string();
    }
    if text.ends_with('%') && text[..text.len() - 1].trim().parse::<f64>().is_ok() {
        return format!("Remove the percent sign. {FIX}");
    }
    FIX.to_string()
}

/// `1,234`, `12 345.5`, `1'000'000`: digits in groups of three after the first.
fn grouping_separator(text: &str) -> Option<char> {
    let body = text.strip_prefix(['-', '+']).unwrap_or(text);
    let int_part = body.split('.').next().unwrap_or(body);
    if body.matches('.').count() > 1 {
        return None;
    }
    let frac_ok = body
        .split('.')
        .nth(1)
        .is_none_or(|f| f.chars().all(|c| c.is_ascii_digit()));
    if !frac_ok {
        return None;
    }
    let sep = int_part.chars().find(|c| !c.is_ascii_digit())?;
    if ![',', ' ', '\u{a0}', '\u{202f}', '\'', '_'].contains(&sep) {
        return None;
    }
    let groups: Vec<&str> = int_part.split(sep).collect();
    let first_ok = (1..=3).contains(&groups[0].len());
    let rest_ok = groups[1..].iter().all(|g| g.len() == 3);
    let digits_ok = groups
        .iter()
        .all(|g| !g.is_empty() && g.chars().all(|c| c.is_ascii_digit()));
    (groups.len() >= 2 && first_ok && rest_ok && digits_ok).then_some(sep)
}

/// `3,25` or `-0,5`: digits, one comma, digits, not in thousands groups.
pub(crate) fn is_decimal_comma(text: &str) -> bool {
    let body = text.strip_prefix(['-', '+']).unwrap_or(text);
    let mut parts = body.split(',');
    match (parts.next(), parts.next(), parts.next()) {
        (Some(a), Some(b), None) => {
            !a.is_empty()
                && !b.is_empty()
                && a.chars().all(|c| c.is_ascii_digit())
                && b.chars().all(|c| c.is_ascii_digit())
        }
        _ => false,
    }
}

/// `2024-01-31`, `31/01/2024`, `12:30:00`, `2024-01-31T12:00Z`.
fn looks_like_date(text: &str) -> bool {
    let digits = text.chars().filter(char::is_ascii_digit).count();
    let seps = text
        .chars()
        .filter(|c| matches!(c, '-' | '/' | ':' | '.'))
        .count();
    let others_ok = text
        .chars()
        .all(|c| c.is_ascii_digit() || matches!(c, '-' | '/' | ':' | '.' | ' ' | 'T' | 'Z' | '+'));
    let inner_dash = text.chars().skip(1).any(|c| matches!(c, '-' | '/' | ':'));
    others_ok && inner_dash && digits >= 3 && seps >= 2
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_and_missing_tokens() {
        assert_eq!(parse_number(" 1.5 "), Ok(Cell::Value(1.5)));
        assert_eq!(parse_number("-2e-3"), Ok(Cell::Value(-2e-3)));
        for m in ["", "  ", "NA", "na", "NaN", "nan", "NULL", "null"] {
            assert_eq!(parse_number(m), Ok(Cell::Missing), "{m:?}");
        }
        for inf in ["inf", "-Inf", "infinity", "1e400"] {
            assert_eq!(parse_number(inf), Err(CellProblem::Infinite), "{inf:?}");
        }
    }

    #[test]
    fn hints_name_the_likely_cause() {
        let h = |s: &str| match parse_number(s) {
            Err(CellProblem::NotNumeric(h)) => h,
            other => panic!("{s:?} gave {other:?}"),
        };
        assert!(h("1,234").contains("thousands separator"));
        assert!(h("1,234,567.25").contains("thousands separator"));
        assert!(h("1 234").contains("a space as thousands"));
        assert!(h("12\u{a0}345").contains("non-breaking space"));
        assert!(h("3,25").contains("decimal comma"));
        assert!(h("2024-01-31").contains("date"));
        assert!(h("12:30:00").contains("date"));
        assert!(h("5%").contains("percent"));
        assert!(h("3,25").contains("--decimal-comma"));
        assert!(h("abc").contains("plain decimal number"));
        assert!(h("-").contains("plain decimal number"));
    }

    #[test]
    fn decimal_comma_mode() {
        let p = |s| parse_number_with(s, true);
        assert_eq!(p("3,25"), Ok(Cell::Value(3.25)));
        assert_eq!(p("-1,5e-3"), Ok(Cell::Value(-1.5e-3)));
        assert_eq!(p("12"), Ok(Cell::Value(12.0)));
        assert_eq!(p("NA"), Ok(Cell::Missing));
        assert!(matches!(p("1.234,5"), Err(CellProblem::NotNumeric(h)) if h.contains("thousands")));
        assert!(matches!(p("3.25"), Err(CellProblem::NotNumeric(h)) if h.contains("point")));
        assert!(matches!(p("3,2,5"), Err(CellProblem::NotNumeric(_))));
    }

    #[test]
    fn regression_hint_on_cell_starting_with_multibyte_char() {
        // Found by the series_csv fuzz target: slicing at byte 1 split a BOM inside a cell.
        assert!(hint_for("\u{feff}12").contains("plain decimal number"));
        assert!(hint_for("é-1-2").contains("plain decimal number"));
    }
}
