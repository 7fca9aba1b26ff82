//! The verdict table printed in the terminal at the end of a run: one aligned row per pair,
//! review first, shortened to the review rows (and flagged rows) above a size limit.

use crate::model::VerdictKind;
use crate::order::group_rank;

/// Pairs up to which every row is printed; above it, only review and flagged rows.
pub const DEFAULT_TABLE_ROWS: usize = 40;

/// One pair in the terminal table.
#[derive(Debug, Clone, PartialEq)]
pub struct TableRow {
    /// The hypothesised driver.
    pub driver: String,
    /// The hypothesised response.
    pub response: String,
    /// Calibrated probability that the driver drives the response (NaN when unscored).
    pub p_causal: f64,
    /// The verdict.
    pub verdict: VerdictKind,
    /// Short reason codes, empty when none.
    pub reasons: Vec<String>,
    /// Values of the extra columns named in [`TableOptions::extra_columns`], in that order.
    pub extra: Vec<String>,
    /// Marked with `!` at the start of the row and printed even when the table is shortened
    /// (for example a verdict that disagrees with an answer key).
    pub flagged: bool,
}

/// How the table is laid out.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TableOptions {
    /// Above this many pairs, print only review and flagged rows and count the rest.
    pub max_rows: usize,
    /// Headers of extra columns, printed between the verdict and the reasons.
    pub extra_columns: Vec<String>,
    /// What a `!` at the start of a row means, printed under the table when a row is flagged.
    pub flag_meaning: String,
}

impl Default for TableOptions {
    fn default() -> Self {
        Self {
            max_rows: DEFAULT_TABLE_ROWS,
            extra_columns: Vec::new(),
            flag_meaning: "flagged".into(),
        }
    }
}

/// The table as text, one line per row, every line ending in `\n`.
///
/// Rows come review first (closest to an even chance first), then causal and non-causal
/// (most probable first), as in the report. Columns are padded to their widest cell, counted
/// in characters.
///
/// ```
/// use review_report::{TableOptions, TableRow, VerdictKind, verdict_table};
///
/// let row = |d: &str, p, v| TableRow {
///     driver: d.into(), response: "flow".into(), p_causal: p, verdict: v,
///     reasons: vec![], extra: vec![], flagged: false,
/// };
/// let text = verdict_table(
///     &[row("rain", 0.91, VerdictKind::Causal), row("wind", 0.5, VerdictKind::Review)],
///     &TableOptions::default(),
/// );
/// let lines: Vec<&str> = text.lines().collect();
/// assert_eq!(lines[0], "  driver  response  p     verdict  reasons");
/// assert_eq!(lines[1], "  wind    flow      0.50  review   ");
/// assert_eq!(lines[2], "  rain    flow      0.91  causal   ");
/// ```
pub fn verdict_table(rows: &[TableRow], options: &TableOptions) -> String {
    let mut order: Vec<usize> = (0..rows.len()).collect();
    order.sort_by(|&a, &b| {
        let (ra, rb) = (&rows[a], &rows[b]);
        group_rank(ra.verdict)
            .cmp(&group_rank(rb.verdict))
            .then_with(|| match ra.verdict {
                VerdictKind::Review => (ra.p_causal - 0.5)
                    .abs()
                    .total_cmp(&(rb.p_causal - 0.5).abs()),
                _ => rb.p_causal.total_cmp(&ra.p_causal),
            })
            .then_with(|| ra.driver.cmp(&rb.driver))
            .then_with(|| ra.response.cmp(&rb.response))
    });
    let shortened = rows.len() > options.max_rows;
    let shown: Vec<usize> = order
        .into_iter()
        .filter(|&i| !shortened || rows[i].verdict == VerdictKind::Review || rows[i].flagged)
        .collect();

    let mut header = vec![
        "driver".to_string(),
        "response".into(),
        "p".into(),
        "verdict".into(),
    ];
    header.extend(options.extra_columns.iter().cloned());
    header.push("reasons".into());
    let cells: Vec<Vec<String>> = shown
        .iter()
        .map(|&i| {
            let r = &rows[i];
            let mut c = vec![
                r.driver.clone(),
                r.response.clone(),
                if r.p_causal.is_finite() {
                    format!("{:.2}", r.p_causal)
                } else {
                    "-".into()
                },
                r.verdict.as_str().to_string(),
            ];
            c.extend(
                (0..options.extra_columns.len())
                    .map(|k| r.extra.get(k).cloned().unwrap_or_default()),
            );
            c.push(r.reasons.join(";"));
            c
        })
        .collect();
    let width = |k: usize| {
        cells
            .iter()
            .map(|c| c[k].chars().count())
            .chain([header[k].chars().count()])
            .max()
            .unwrap_or(0)
    };
    let widths: Vec<usize> = (0..header.len()).map(width).collect();
    let line = |mark: char, c: &[String]| {
        let mut s = format!("{mark} ");
        for (k, cell) in c.iter().enumerate() {
            if k + 1 == c.len() {
                s.push_str(cell);
            } else {
                s.push_str(cell);
                let pad = widths[k] - cell.chars().count() + 2;
                s.extend(std::iter::repeat_n(' ', pad));
            }
        }
        s.push('\n');
        s
    };
    let mut out = line(' ', &header);
    for (&i, c) in shown.iter().zip(&cells) {
        out.push_str(&line(if rows[i].flagged { '!' } else { ' ' }, c));
    }
    if shortened {
        let hidden: Vec<&TableRow> = rows
            .iter()
            .filter(|r| r.verdict != VerdictKind::Review && !r.flagged)
            .collect();
        let causal = hidden
            .iter()
            .filter(|r| r.verdict == VerdictKind::Causal)
            .count();
        out.push_str(&format!(
            "  ({} pairs, so only the {} review rows are listed{}; not listed: {causal} causal, {} non-causal)\n",
            rows.len(),
            rows.iter().filter(|r| r.verdict == VerdictKind::Review).count(),
            if rows.iter().any(|r| r.flagged && r.verdict != VerdictKind::Review) {
                " with the flagged ones"
            } else {
                ""
            },
            hidden.len() - causal,
        ));
    }
    if rows.iter().any(|r| r.flagged) {
        out.push_str(&format!("  ! {}\n", options.flag_meaning));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(d: &str, r: &str, p: f64, v: VerdictKind) -> TableRow {
        TableRow {
            driver: d.into(),
            response: r.into(),
            p_causal: p,
            verdict: v,
            reasons: if v == VerdictKind::Review {
                vec!["uncertain".into(), "synchrony".into()]
            } else {
                vec![]
            },
            extra: vec![],
            flagged: false,
        }
    }

    #[test]
    fn review_first_and_aligned() {
        let rows = vec![
            row("a", "b", 0.1, VerdictKind::NonCausal),
            row("température", "b", 0.95, VerdictKind::Causal),
            row("b", "a", 0.45, VerdictKind::Review),
            row("c", "a", f64::NAN, VerdictKind::Review),
        ];
        let text = verdict_table(&rows, &TableOptions::default());
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), 5);
        assert!(lines[1].starts_with("  b  ") && lines[1].ends_with("uncertain;synchrony"));
        assert!(lines[2].contains("  -  ") && lines[2].contains("review"));
        assert!(lines[3].contains("température") && lines[3].contains("causal"));
        assert!(lines[4].contains("non-causal"));
        // Every row's verdict starts in the same character column as the header's.
        let at = |l: &str, word: &str| {
            let chars: Vec<char> = l.chars().collect();
            let w: Vec<char> = word.chars().collect();
            chars.windows(w.len()).position(|x| x == w.as_slice())
        };
        let c0 = at(lines[0], "verdict").unwrap();
        for (l, v) in lines[1..]
            .iter()
            .zip(["review", "review", "causal", "non-causal"])
        {
            assert_eq!(at(l, v), Some(c0), "{l}");
        }
    }

    #[test]
    fn long_tables_keep_review_and_flagged_rows() {
        let mut rows: Vec<TableRow> = (0..50)
            .map(|k| row(&format!("v{k}"), "r", 0.9, VerdictKind::Causal))
            .collect();
        rows.extend((0..30).map(|k| row(&format!("w{k}"), "r", 0.05, VerdictKind::NonCausal)));
        rows.push(row("x", "r", 0.5, VerdictKind::Review));
        rows[3].flagged = true;
        rows[3].extra = vec!["NO".into()];
        let options = TableOptions {
            extra_columns: vec!["agrees with key".into()],
            flag_meaning: "disagrees with the answer key".into(),
            ..TableOptions::default()
        };
        let text = verdict_table(&rows, &options);
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), 5, "{text}");
        assert!(lines[0].contains("agrees with key"));
        assert!(lines[1].contains("review"));
        assert!(lines[2].starts_with("! v3") && lines[2].contains("NO"));
        assert!(lines[3].contains("81 pairs") && lines[3].contains("49 causal, 30 non-causal"));
        assert_eq!(lines[4], "  ! disagrees with the answer key");
        // At 40 pairs every row is printed (header, 40 rows, the flag's meaning).
        let text = verdict_table(&rows[..40], &TableOptions::default());
        assert_eq!(text.lines().count(), 42);
    }
}
