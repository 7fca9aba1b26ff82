//! The result tables of a labelling run, as exportable files (formats in the README).

use crate::{CycleFact, Judgement, PairRecord};
use crossmap_engine::Embedding;
use series_io::{CsvTable, CurveRow, Export, format_f64};

/// Names as written into CSV files: a name that begins with `=`, `+`, `-`, `@`, a tab or a
/// carriage return gets a leading `'`, so a spreadsheet shows it as text instead of running
/// it as a formula (the OWASP guidance on CSV injection). Other names are unchanged.
pub fn spreadsheet_safe(names: &[String]) -> Vec<String> {
    names
        .iter()
        .map(|n| {
            if n.starts_with(['=', '+', '-', '@', '\t', '\r']) {
                format!("'{n}")
            } else {
                n.clone()
            }
        })
        .collect()
}

fn opt(v: Option<f64>) -> String {
    v.map(format_f64).unwrap_or_default()
}

/// `labels.csv` with a reviewer's decisions beside the model's: `reviewer_decision`
/// (`causal`, `non-causal`, `unsure`, empty when the pair was not decided),
/// `reviewer_note`, `reviewer`, `decided_at`. Names are matched as written in the CSV files.
pub fn with_decisions(mut labels: CsvTable, decisions: &series_io::DecisionFile) -> CsvTable {
    labels.header.extend(
        [
            "reviewer_decision",
            "reviewer_note",
            "reviewer",
            "decided_at",
        ]
        .map(String::from),
    );
    for row in &mut labels.rows {
        match decisions.get(&row[0], &row[1]) {
            Some(d) => row.extend([
                d.decision.as_str().to_string(),
                d.note.clone(),
                d.reviewer.clone(),
                d.decided_at.clone(),
            ]),
            None => row.extend(std::iter::repeat_n(String::new(), 4)),
        }
    }
    labels
}

/// `curves.csv`: one row per ensemble member; replicates are numbered from 1.
///
/// Written row by row: at 100 variables the table has about 12 million rows, which as
/// formatted fields held in memory would take several GiB.
pub fn curves<'a>(names: &'a [String], records: &'a [PairRecord]) -> CurvesTable<'a> {
    CurvesTable { names, records }
}

/// The `curves.csv` export, formatted while it is written.
pub struct CurvesTable<'a> {
    names: &'a [String],
    records: &'a [PairRecord],
}

impl Export for CurvesTable<'_> {
    fn file_name(&self) -> &str {
        "curves.csv"
    }

    fn write_to(&self, w: &mut dyn std::io::Write) -> std::io::Result<()> {
        let names = self.names;
        let rows = self.records.iter().flat_map(move |rec| {
            let f = &rec.evidence.forward;
            f.library_sizes
                .iter()
                .zip(&f.skills)
                .flat_map(move |(&library_size, skills)| {
                    skills.iter().enumerate().map(move |(r, &skill)| CurveRow {
                        driver: names[rec.driver].clone(),
                        response: names[rec.response].clone(),
                        library_size,
                        replicate: r + 1,
                        skill,
                    })
                })
        });
        series_io::write_curves(w, rows)
    }
}

/// `lags.csv`: the lag profile of each pair at its largest library size.
pub fn lags(names: &[String], records: &[PairRecord]) -> CsvTable {
    let mut rows = Vec::new();
    for rec in records {
        if let Some(lag) = &rec.evidence.lag {
            for (l, s) in lag.lags.iter().zip(&lag.skills) {
                rows.push(vec![
                    names[rec.driver].clone(),
                    names[rec.response].clone(),
                    l.to_string(),
                    format_f64(*s),
                ]);
            }
        }
    }
    table("lags.csv", &["driver", "response", "lag", "skill"], rows)
}

/// `surrogates.csv`: the skill of each surrogate driver at the largest library size, of two
/// kinds: `phase` (phase-randomised) and `seasonal` (the driver's cycle of `period` samples
/// kept, anomalies phase-randomised). `period` is 0 where no cycle was kept: on phase rows, and
/// on seasonal rows of a driver whose cycle is no season (`cycles`, by variable), whose
/// seasonal surrogates are then phase-randomised too. A number on every row keeps the column
/// numeric and every row in a group-by.
pub fn surrogates(names: &[String], records: &[PairRecord], cycles: &[CycleFact]) -> CsvTable {
    let mut rows = Vec::new();
    for rec in records {
        let (d, r) = (&names[rec.driver], &names[rec.response]);
        let mut push = |kind: &str, period: String, skills: &[f64]| {
            for (k, s) in skills.iter().enumerate() {
                let row = [d, r, kind, &period, &(k + 1).to_string(), &format_f64(*s)];
                rows.push(row.map(|c| c.to_string()).to_vec());
            }
        };
        if let Some(skills) = &rec.evidence.surrogate_skills {
            push("phase", "0".into(), skills);
        }
        if let Some(seasonal) = &rec.evidence.seasonal {
            let kept = cycles.get(rec.driver).is_some_and(|c| c.season);
            let period = if kept {
                format!("{:.3}", seasonal.driver.period)
            } else {
                "0".into()
            };
            push("seasonal", period, &seasonal.skills);
        }
    }
    table(
        "surrogates.csv",
        &["driver", "response", "kind", "period", "surrogate", "skill"],
        rows,
    )
}

/// `embedding.csv`.
pub fn embedding(names: &[String], embeddings: &[Embedding]) -> CsvTable {
    let rows = names
        .iter()
        .zip(embeddings)
        .map(|(n, e)| {
            vec![
                n.clone(),
                e.e.to_string(),
                e.tau.to_string(),
                format_f64(e.simplex_skill),
            ]
        })
        .collect();
    table(
        "embedding.csv",
        &["variable", "E", "tau", "simplex_skill"],
        rows,
    )
}

/// `features.csv`: driver, response, then one column per feature (empty = unavailable).
pub fn features(names: &[String], records: &[PairRecord]) -> CsvTable {
    let mut header = vec!["driver".to_string(), "response".to_string()];
    header.extend(ensemble_features::names().into_iter().map(String::from));
    let rows = records
        .iter()
        .map(|rec| {
            let mut row = vec![names[rec.driver].clone(), names[rec.response].clone()];
            row.extend(rec.features.iter().map(|v| opt(*v)));
            row
        })
        .collect();
    CsvTable {
        name: "features.csv".into(),
        header,
        rows,
    }
}

/// `labels.csv`, review cases first, then causal, then non-causal; within a group by
/// decreasing probability.
pub fn labels(names: &[String], records: &[PairRecord], judgements: &[Judgement]) -> CsvTable {
    let mut order: Vec<usize> = (0..records.len()).collect();
    order.sort_by(|&a, &b| {
        let (ja, jb) = (&judgements[a], &judgements[b]);
        ja.verdict
            .sort_rank()
            .cmp(&jb.verdict.sort_rank())
            .then(jb.p_causal.total_cmp(&ja.p_causal))
            .then(a.cmp(&b))
    });
    let rows = order
        .into_iter()
        .map(|k| {
            let (rec, j) = (&records[k], &judgements[k]);
            let fine = |i: usize| j.fine.map_or(String::new(), |f| format!("{:.4}", f[i]));
            vec![
                names[rec.driver].clone(),
                names[rec.response].clone(),
                if j.p_causal.is_nan() {
                    String::new()
                } else {
                    format!("{:.4}", j.p_causal)
                },
                j.verdict.as_str().to_string(),
                verdict_model::reasons_field(&j.reasons),
                j.head.to_string(),
                if j.ood_score.is_nan() {
                    String::new()
                } else {
                    format!("{:.3}", j.ood_score)
                },
                if j.ood_threshold.is_nan() {
                    String::new()
                } else {
                    format!("{:.3}", j.ood_threshold)
                },
                fine(0),
                fine(1),
                fine(2),
                fine(3),
            ]
        })
        .collect();
    table(
        "labels.csv",
        &[
            "driver",
            "response",
            "p_causal",
            "verdict",
            "reasons",
            "model_head",
            "unfamiliarity",
            "unfamiliarity_threshold",
            "p_direct",
            "p_indirect",
            "p_confounded",
            "p_independent",
        ],
        rows,
    )
}

fn table(name: &str, header: &[&str], rows: Vec<Vec<String>>) -> CsvTable {
    CsvTable {
        name: name.into(),
        header: header.iter().map(|h| h.to_string()).collect(),
        rows,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formula_like_names_are_neutralised() {
        // Leading characters from the OWASP "CSV Injection" page (common practice).
        let names: Vec<String> = [
            "=HYPERLINK(\"x\")",
            "+cmd|' /C calc'!A0",
            "-2+3",
            "@SUM(A1)",
            "\tx",
            "ok",
            "a=b",
        ]
        .map(String::from)
        .to_vec();
        let safe = spreadsheet_safe(&names);
        assert_eq!(safe[0], "'=HYPERLINK(\"x\")");
        assert_eq!(safe[1], "'+cmd|' /C calc'!A0");
        assert_eq!(safe[2], "'-2+3");
        assert_eq!(safe[3], "'@SUM(A1)");
        assert_eq!(safe[4], "'\tx");
        assert_eq!(&safe[5..], ["ok", "a=b"]);
    }
}
