//! Assembly of the HTML page: summary, verdict matrix, tables and per-pair panels.

use std::collections::BTreeMap;
use std::fmt::Write;

use crate::escape::{esc, pair_anchor};
use crate::model::{PairView, ReportData, VerdictKind};
use crate::order::display_order;
use crate::plots::{self, SURROGATE_BAND};
use crate::stats::{BAND, quantile};
use crate::{CAUTION, RenderOptions, ReportError};

const CSS: &str = include_str!("report.css");
/// The decision form's script: local storage and the CSV export, no network.
const DECIDE_JS: &str = include_str!("decide.js");

/// Appends formatted text; writing into a `String` cannot fail.
macro_rules! put {
    ($o:expr, $($t:tt)*) => {{
        let _ = write!($o, $($t)*);
    }};
}

/// Checks the view model once, so rendering itself can assume consistent data.
fn validate(data: &ReportData) -> Result<BTreeMap<(&str, &str), usize>, ReportError> {
    let mut seen = BTreeMap::new();
    for v in &data.variables {
        if seen.insert(v.as_str(), ()).is_some() {
            return Err(ReportError::DuplicateVariable(v.clone()));
        }
    }
    let mut cells = BTreeMap::new();
    for (i, p) in data.pairs.iter().enumerate() {
        let mismatch = |detail: String| ReportError::ShapeMismatch {
            driver: p.driver.clone(),
            response: p.response.clone(),
            detail,
        };
        for name in [&p.driver, &p.response] {
            if !seen.contains_key(name.as_str()) {
                return Err(ReportError::UnknownVariable {
                    driver: p.driver.clone(),
                    response: p.response.clone(),
                    missing: name.clone(),
                });
            }
        }
        if cells
            .insert((p.driver.as_str(), p.response.as_str()), i)
            .is_some()
        {
            return Err(ReportError::DuplicatePair {
                driver: p.driver.clone(),
                response: p.response.clone(),
            });
        }
        if !(p.p_causal.is_nan() || (0.0..=1.0).contains(&p.p_causal)) {
            return Err(ReportError::InvalidProbability {
                driver: p.driver.clone(),
                response: p.response.clone(),
                value: p.p_causal,
            });
        }
        if p.forward.len() != p.library_sizes.len() {
            return Err(mismatch(format!(
                "{} library sizes but {} rows of forward skills; give one row per size",
                p.library_sizes.len(),
                p.forward.len()
            )));
        }
        if let Some(r) = &p.reverse {
            let sizes = p.reverse_library_sizes.as_ref().unwrap_or(&p.library_sizes);
            if r.len() != sizes.len() {
                return Err(mismatch(format!(
                    "{} reverse library sizes but {} rows of reverse skills; give one row per size",
                    sizes.len(),
                    r.len()
                )));
            }
            if sizes.contains(&0) {
                return Err(mismatch(
                    "a reverse library size of 0 cannot be drawn; sizes must be positive".into(),
                ));
            }
        }
        if p.library_sizes.contains(&0) {
            return Err(mismatch(
                "a library size of 0 cannot be drawn; sizes must be positive".into(),
            ));
        }
        if let Some((lags, skill)) = &p.lag_profile
            && lags.len() != skill.len()
        {
            return Err(mismatch(format!(
                "lag profile has {} lags but {} skills",
                lags.len(),
                skill.len()
            )));
        }
    }
    Ok(cells)
}

/// Probability as shown everywhere on the page.
/// A probability; NaN marks a pair no model head could score (shown as "n/a").
fn fmt_p(p: f64) -> String {
    if p.is_nan() {
        "n/a".to_string()
    } else {
        format!("{p:.2}")
    }
}

/// A feature or table value: compact, deterministic, and explicit about missing values.
fn fmt_value(v: Option<f64>) -> String {
    match v {
        None => "n/a".to_owned(),
        Some(x) if !x.is_finite() => "n/a".to_owned(),
        Some(0.0) => "0".to_owned(),
        Some(x) if x.abs() >= 1e4 || x.abs() < 1e-3 => format!("{x:.2e}"),
        Some(x) => format!("{x:.3}"),
    }
}

fn badge(out: &mut String, v: VerdictKind) {
    put!(
        out,
        r#"<span class="badge v-{}"><span class="g" aria-hidden="true">{}</span> {}</span>"#,
        v.css(),
        v.glyph(),
        v.as_str()
    );
}

fn question(out: &mut String, p: &PairView) {
    put!(
        out,
        "Does <b>{}</b> drive <b>{}</b>?",
        esc(&p.driver),
        esc(&p.response)
    );
}

/// Renders the whole page.
pub(crate) fn render(data: &ReportData, opts: &RenderOptions) -> Result<String, ReportError> {
    let cells = validate(data)?;
    let order = display_order(&data.pairs);
    // Anchors follow the display position, so the page does not depend on input order.
    let mut rank = vec![0; order.len()];
    for (pos, &k) in order.iter().enumerate() {
        rank[k] = pos;
    }
    let mut out = String::with_capacity(64 * 1024);

    put!(
        out,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <title>{}</title>\n<style>\n{}</style>\n</head>\n\
         <body data-input-sha256=\"{}\" data-input-name=\"{}\">\n",
        esc(&data.title),
        CSS,
        esc(data.input_sha256.as_deref().unwrap_or("")),
        esc(&data.input_name)
    );
    header(&mut out, data);
    put!(
        out,
        "<aside id=\"caution\" class=\"caution\" role=\"note\"><strong>Read this first.</strong> {}</aside>\n",
        esc(CAUTION)
    );
    decisions_bar(&mut out, data);
    summary(&mut out, data, &cells, &order, &rank);
    panels(&mut out, data, &order, &rank, opts)?;
    put!(out, "<script>\n{}</script>\n", DECIDE_JS);
    out.push_str("</body>\n</html>\n");
    Ok(out)
}

/// The reviewer's tools: name, export and clear; the decisions themselves sit in each panel.
fn decisions_bar(out: &mut String, data: &ReportData) {
    out.push_str(
        "<section id=\"decisions\" class=\"decisions\">\n<h2>Your decisions</h2>\n\
         <p class=\"lead\">Mark each pair causal, non-causal or unsure in its panel, with a note. \
         Decisions stay in this browser (not in this file) until you export them as \
         <code>decisions.csv</code>, with the columns \
         <code>driver,response,decision,note,reviewer,decided_at,input_sha256</code>; \
         <code>ccm-triage train --decisions</code> can learn from them and \
         <code>ccm-triage scan --decisions</code> shows them beside the model's verdicts.",
    );
    if data.input_sha256.is_none() {
        out.push_str(" This run recorded no input checksum, so exported decisions cannot be matched to a run.");
    }
    out.push_str(
        "</p>\n<p><label>Reviewer <input id=\"reviewer\" type=\"text\" size=\"24\" \
         autocomplete=\"name\"></label> <button type=\"button\" id=\"export-decisions\">Export \
         decisions (CSV)</button> <button type=\"button\" id=\"clear-decisions\">Forget \
         decisions</button> <span id=\"decision-count\" class=\"muted\"></span></p>\n\
         <noscript><p class=\"muted\">Scripts are off: the decision form needs them.</p></noscript>\n\
         </section>\n",
    );
}

/// One pair's decision form, started from a given decision when there is one.
fn decision_form(out: &mut String, anchor: usize, p: &PairView) {
    let safe = |n: &str| {
        if n.starts_with(['=', '+', '-', '@', '\t', '\r']) {
            format!("'{n}")
        } else {
            n.to_string()
        }
    };
    put!(
        out,
        "<fieldset class=\"decide\" data-driver=\"{}\" data-response=\"{}\"",
        esc(&safe(&p.driver)),
        esc(&safe(&p.response))
    );
    if let Some(d) = &p.decision {
        put!(
            out,
            " data-given=\"{}\" data-given-note=\"{}\" data-given-reviewer=\"{}\" data-given-at=\"{}\"",
            esc(&d.decision),
            esc(&d.note),
            esc(&d.reviewer),
            esc(&d.decided_at)
        );
    }
    out.push_str("><legend>Your decision</legend>");
    for (value, text) in [
        ("causal", "causal"),
        ("non-causal", "non-causal"),
        ("unsure", "unsure"),
    ] {
        put!(
            out,
            "<label><input type=\"radio\" name=\"decide-{anchor}\" value=\"{value}\"> {text}</label> "
        );
    }
    out.push_str(
        "<label>note <input type=\"text\" class=\"note\" size=\"40\"></label></fieldset>\n",
    );
}

fn header(out: &mut String, data: &ReportData) {
    put!(
        out,
        "<header>\n<h1>{}</h1>\n<dl class=\"meta\">",
        esc(&data.title)
    );
    let sha = data.input_sha256.as_deref().unwrap_or("not recorded");
    for (k, v) in [
        ("input", data.input_name.as_str()),
        ("input sha256", sha),
        ("tool version", data.tool_version.as_str()),
        ("model", data.model_identity.as_str()),
    ] {
        put!(out, "<div><dt>{}</dt><dd>{}</dd></div>", k, esc(v));
    }
    out.push_str("</dl>\n</header>\n");
}

fn counts(data: &ReportData) -> [(VerdictKind, usize); 3] {
    let mut c = [
        (VerdictKind::Review, 0),
        (VerdictKind::Causal, 0),
        (VerdictKind::NonCausal, 0),
    ];
    for p in &data.pairs {
        for slot in c.iter_mut() {
            if slot.0 == p.verdict {
                slot.1 += 1;
            }
        }
    }
    c
}

fn summary(
    out: &mut String,
    data: &ReportData,
    cells: &BTreeMap<(&str, &str), usize>,
    order: &[usize],
    rank: &[usize],
) {
    let n = data.variables.len();
    out.push_str("<section id=\"summary\">\n<h2>At a glance</h2>\n<p class=\"counts\">");
    for (i, (v, c)) in counts(data).into_iter().enumerate() {
        if i > 0 {
            out.push_str(" &middot; ");
        }
        put!(out, "<a href=\"#group-{}\">", v.css());
        badge(out, v);
        put!(out, " <b>{c}</b></a>");
    }
    put!(
        out,
        " &middot; {} ordered pairs of {} variables assessed</p>\n",
        data.pairs.len(),
        n
    );
    if let Some(&first) = order.first() {
        let p = &data.pairs[first];
        if p.verdict == VerdictKind::Review {
            put!(
                out,
                "<p class=\"start\">Start with <a href=\"#{}\">",
                pair_anchor(rank[first])
            );
            question(out, p);
            out.push_str("</a>: the least settled of the pairs marked for review.</p>\n");
        }
    }

    if n > MATRIX_MAX_VARIABLES {
        heat_map(out, data, rank);
    } else {
        matrix(out, data, cells, rank);
    }
    summary_tail(out, data);
}

/// Above this many variables the verdict matrix (which grows with the square of the
/// variables, assessed or not) gives way to a heat map drawn only for the assessed pairs.
pub const MATRIX_MAX_VARIABLES: usize = 60;

/// The probability heat map of a large run: one small square per assessed pair at (driver
/// row, response column), coloured by the probability; its size grows with the pairs only.
fn heat_map(out: &mut String, data: &ReportData, rank: &[usize]) {
    let n = data.variables.len();
    let index: BTreeMap<&str, usize> = data
        .variables
        .iter()
        .enumerate()
        .map(|(k, v)| (v.as_str(), k))
        .collect();
    // The drawing is 720 units wide whatever the count; cells shrink as variables grow.
    let cell = 720.0 / n as f64;
    put!(
        out,
        "<figure id=\"heat-map\" class=\"heat\">\n<figcaption>{n} variables are too many for a \
         verdict matrix. Each square is one assessed pair, at the row of its driver and the \
         column of its response (variables in the order of the input), coloured by the \
         probability that the driver drives the response, from blue (0) to red (1). Pairs \
         marked for review and the most probable pairs are shown in detail below; every pair \
         is in labels.csv.</figcaption>\n<svg xmlns=\"http://www.w3.org/2000/svg\" \
         viewBox=\"0 0 720 720\" width=\"720\" height=\"720\" role=\"img\" \
         aria-label=\"probability heat map\"><rect width=\"720\" height=\"720\" fill=\"#f4f4f4\"/>\n"
    );
    for (k, p) in data.pairs.iter().enumerate() {
        let (Some(&i), Some(&j)) = (index.get(p.driver.as_str()), index.get(p.response.as_str()))
        else {
            continue;
        };
        let q = p.p_causal.clamp(0.0, 1.0);
        // Blue (hue 240) through purple to red (hue 360) as the probability rises.
        let hue = 240.0 + 120.0 * q;
        put!(
            out,
            "<a href=\"#{}\"><rect x=\"{:.2}\" y=\"{:.2}\" width=\"{:.2}\" height=\"{:.2}\" \
             fill=\"hsl({:.0},75%,50%)\"><title>does {} drive {}? p = {}, {}</title></rect></a>\n",
            pair_anchor(rank[k]),
            j as f64 * cell,
            i as f64 * cell,
            cell.max(0.5),
            cell.max(0.5),
            hue,
            esc(&p.driver),
            esc(&p.response),
            fmt_p(p.p_causal),
            p.verdict.as_str()
        );
    }
    out.push_str("</svg>\n</figure>\n");
}

/// The verdict matrix of a run of up to [`MATRIX_MAX_VARIABLES`] variables.
fn matrix(
    out: &mut String,
    data: &ReportData,
    cells: &BTreeMap<(&str, &str), usize>,
    rank: &[usize],
) {
    let n = data.variables.len();
    // Cell size follows the number of variables so 40 axes still fit a screen, and the
    // wrapper scrolls with sticky headers beyond that.
    let size = match n {
        0..=10 => "m-l",
        11..=24 => "m-m",
        _ => "m-s",
    };
    put!(
        out,
        "<div class=\"matrix-wrap\">\n<table id=\"matrix\" class=\"matrix {size}\">\n\
         <caption>Each cell answers <em>does the row variable drive the column variable?</em> \
         It shows the verdict mark and the probability that the row drives the column; \
         the hatched diagonal is not tested. Select a cell to see its evidence.</caption>\n<thead><tr>\
         <th class=\"corner\" scope=\"col\"><span class=\"ax-d\">driver &darr;</span> \
         <span class=\"ax-r\">response &rarr;</span></th>"
    );
    for v in &data.variables {
        put!(
            out,
            "<th scope=\"col\" class=\"col\" title=\"response: {0}\"><span>{0}</span></th>",
            esc(v)
        );
    }
    out.push_str("</tr></thead>\n<tbody>\n");
    for (i, d) in data.variables.iter().enumerate() {
        put!(
            out,
            "<tr><th scope=\"row\" class=\"row\" title=\"driver: {0}\"><span>{0}</span></th>",
            esc(d)
        );
        for (j, r) in data.variables.iter().enumerate() {
            if i == j {
                put!(
                    out,
                    "<td class=\"cell diag\" data-cell=\"{i}-{j}\" title=\"a variable is not tested against itself\"></td>"
                );
                continue;
            }
            match cells.get(&(d.as_str(), r.as_str())) {
                None => put!(
                    out,
                    "<td class=\"cell none\" data-cell=\"{i}-{j}\" title=\"does {} drive {}? not assessed\">&ndash;</td>",
                    esc(d),
                    esc(r)
                ),
                Some(&k) => {
                    let p = &data.pairs[k];
                    let (fill, ink) = shade(p.p_causal);
                    let key = p
                        .answer_key
                        .as_ref()
                        .map(|key| format!(", answer key: {}", esc(&key.label)))
                        .unwrap_or_default();
                    put!(
                        out,
                        "<td class=\"cell v-{}\" style=\"background:{fill};color:{ink}\" data-cell=\"{i}-{j}\" title=\"does {} drive {}? p = {}, {}{key}\">\
                         <a href=\"#{}\"><span class=\"g\">{}</span><span class=\"p\">{}</span></a></td>",
                        p.verdict.css(),
                        esc(d),
                        esc(r),
                        fmt_p(p.p_causal),
                        p.verdict.as_str(),
                        pair_anchor(rank[k]),
                        p.verdict.glyph(),
                        fmt_p(p.p_causal).trim_start_matches('0').to_string()
                    );
                }
            }
        }
        out.push_str("</tr>\n");
    }
    out.push_str("</tbody>\n</table>\n</div>\n");
    out.push_str(
        "<p class=\"key\"><span class=\"badge v-rev\"><span class=\"g\">?</span> review</span> a person should look: \
         the evidence is ambiguous or unusual &middot; \
         <span class=\"badge v-yes\"><span class=\"g\">&#x25B2;</span> causal</span> the evidence looks like driving &middot; \
         <span class=\"badge v-no\"><span class=\"g\">&#x25CB;</span> non-causal</span> it does not &middot; \
         &ndash; not assessed. Cells are shaded by p, from white at 0 \
         <span class=\"ramp\" aria-hidden=\"true\"></span> to deep blue at 1.</p>\n",
    );
}

/// A matrix cell's fill for probability `p` (white at 0 to the causal blue at 1, so 0.29 and
/// 0.79 look different whatever their verdict), and a text colour that stays readable on it.
fn shade(p: f64) -> (String, &'static str) {
    const FULL: (f64, f64, f64) = (29.0, 78.0, 137.0);
    let t = if p.is_finite() {
        p.clamp(0.0, 1.0) * 0.85
    } else {
        0.0
    };
    let mix = |c: f64| (255.0 + (c - 255.0) * t).round() as u8;
    let fill = format!("#{:02x}{:02x}{:02x}", mix(FULL.0), mix(FULL.1), mix(FULL.2));
    (fill, if t > 0.45 { "#fff" } else { "#222630" })
}

/// The tables and notes that close the summary.
fn summary_tail(out: &mut String, data: &ReportData) {
    out.push_str("<div class=\"tables\">\n");
    embedding_table(out, data);
    params_table(out, data);
    out.push_str("</div>\n");
    if !data.notes.is_empty() {
        out.push_str("<div class=\"notes\"><h3>Notes on this run</h3><ul>");
        for note in &data.notes {
            put!(out, "<li>{}</li>", esc(note));
        }
        out.push_str("</ul></div>\n");
    }
    out.push_str("</section>\n");
}

fn embedding_table(out: &mut String, data: &ReportData) {
    out.push_str("<div class=\"tbl\"><h3>Embedding per variable</h3>");
    if data.embeddings.is_empty() {
        out.push_str(
            "<p class=\"muted\">No embeddings were chosen in this run: the skill ensembles were supplied from elsewhere.</p></div>\n",
        );
        return;
    }
    out.push_str(
        "<div class=\"scroll\"><table id=\"embedding\"><thead><tr><th>variable</th>\
         <th title=\"embedding dimension\">E</th><th title=\"delay between coordinates, time steps\">&tau;</th>\
         <th title=\"simplex projection forecast skill at the chosen E and tau\">forecast skill</th>\
         <th title=\"period of the dominant cycle, time steps\">cycle</th>\
         <th title=\"share of variance carried by the mean cycle by phase (adjusted R squared)\">cycle strength</th>\
         <th title=\"whether the cycle counts as a season (period of at least 4 steps, strength of at least 0.1), so the seasonal surrogates keep it\">season</th></tr></thead><tbody>",
    );
    for e in &data.embeddings {
        put!(
            out,
            "<tr><td>{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td>\
             <td class=\"num\">{}</td><td class=\"num\">{}</td><td>{}</td></tr>",
            esc(&e.variable),
            e.e,
            e.tau,
            fmt_value(Some(e.simplex_skill)),
            e.cycle
                .map_or("none".to_string(), |(p, _)| format!("{p:.1}")),
            fmt_value(e.cycle.map(|(_, s)| s)),
            if e.season { "yes" } else { "no" }
        );
    }
    out.push_str("</tbody></table></div></div>\n");
}

fn params_table(out: &mut String, data: &ReportData) {
    out.push_str("<div class=\"tbl\"><h3>Run parameters</h3>");
    if data.params.is_empty() {
        out.push_str("<p class=\"muted\">No parameters recorded.</p></div>\n");
        return;
    }
    out.push_str(
        "<div class=\"scroll\"><table id=\"params\"><thead><tr><th>parameter</th><th>value</th></tr></thead><tbody>",
    );
    for (k, v) in &data.params {
        put!(out, "<tr><td>{}</td><td>{}</td></tr>", esc(k), esc(v));
    }
    out.push_str("</tbody></table></div></div>\n");
}

fn panels(
    out: &mut String,
    data: &ReportData,
    order: &[usize],
    rank: &[usize],
    opts: &RenderOptions,
) -> Result<(), ReportError> {
    let (full, rest) = order.split_at(order.len().min(opts.max_panels));
    let axis = skill_axis(data, opts);
    for (v, title, lead) in [
        (
            VerdictKind::Review,
            "Review these first",
            "The classifier could not settle these pairs, or their evidence looks unusual. Most uncertain first.",
        ),
        (
            VerdictKind::Causal,
            "Labelled causal",
            "The evidence looks like the driver drives the response. Most probable first.",
        ),
        (
            VerdictKind::NonCausal,
            "Labelled non-causal",
            "The evidence does not look like driving. Near misses first.",
        ),
    ] {
        let members: Vec<usize> = full
            .iter()
            .copied()
            .filter(|&k| data.pairs[k].verdict == v)
            .collect();
        let total = data.pairs.iter().filter(|p| p.verdict == v).count();
        put!(
            out,
            "<section id=\"group-{}\" class=\"group\">\n<h2>",
            v.css()
        );
        badge(out, v);
        put!(out, " {title} <span class=\"n\">({total})</span></h2>\n");
        if total == 0 {
            out.push_str("<p class=\"muted\">None.</p>\n</section>\n");
            continue;
        }
        put!(out, "<p class=\"lead\">{lead}</p>\n");
        for k in members {
            panel(out, rank[k], &data.pairs[k], v == VerdictKind::Review, axis)?;
        }
        let shown_elsewhere = rest.iter().filter(|&&k| data.pairs[k].verdict == v).count();
        if shown_elsewhere > 0 {
            put!(
                out,
                "<p class=\"muted\">{shown_elsewhere} more in the compact table below.</p>\n"
            );
        }
        out.push_str("</section>\n");
    }
    if !rest.is_empty() {
        compact_table(out, data, rest, rank, opts.max_panels);
    }
    Ok(())
}

/// The skill axis every figure shares, when the options ask for one.
fn skill_axis(data: &ReportData, opts: &RenderOptions) -> Option<(f64, f64)> {
    opts.shared_skill_axis
        .then(|| plots::shared_skill_axis(&data.pairs))
}

/// The skill figures of the first `max` pairs in display order, as standalone files.
pub(crate) fn figures(
    data: &ReportData,
    opts: &RenderOptions,
    max: usize,
) -> Result<Vec<crate::PairFigure>, ReportError> {
    validate(data)?;
    let axis = skill_axis(data, opts);
    display_order(&data.pairs)
        .into_iter()
        .take(max)
        .enumerate()
        .filter(|(_, k)| !data.pairs[*k].library_sizes.is_empty())
        .map(|(pos, k)| {
            let p = &data.pairs[k];
            Ok(crate::PairFigure {
                file_name: format!(
                    "{:04}-{}-drives-{}.svg",
                    pos + 1,
                    file_safe(&p.driver),
                    file_safe(&p.response)
                ),
                svg: plots::skill_curves(p, axis)?,
            })
        })
        .collect()
}

/// A variable name as part of a file name: letters, digits, `-`, `_` and `.` kept, anything
/// else `_`, at most 40 characters.
fn file_safe(name: &str) -> String {
    let safe: String = name
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.') {
                c
            } else {
                '_'
            }
        })
        .take(40)
        .collect();
    if safe.is_empty() || safe.starts_with('.') {
        format!("_{safe}")
    } else {
        safe
    }
}

fn panel(
    out: &mut String,
    anchor: usize,
    p: &PairView,
    open: bool,
    axis: Option<(f64, f64)>,
) -> Result<(), ReportError> {
    put!(
        out,
        "<details class=\"pair v-{}\" id=\"{}\"{}>\n<summary>",
        p.verdict.css(),
        pair_anchor(anchor),
        if open { " open" } else { "" }
    );
    badge(out, p.verdict);
    out.push_str(" <span class=\"q\">");
    question(out, p);
    put!(
        out,
        "</span> <span class=\"pv\">p = {}</span></summary>\n<div class=\"body\">\n",
        fmt_p(p.p_causal)
    );

    out.push_str("<div class=\"verdict\"><p>");
    put!(
        out,
        "Probability that <b>{}</b> drives <b>{}</b>: <strong>{}</strong>, labelled <strong>{}</strong>.",
        esc(&p.driver),
        esc(&p.response),
        fmt_p(p.p_causal),
        p.verdict.as_str()
    );
    out.push_str("</p>");
    if let Some(key) = &p.answer_key {
        let agreement = match p.agrees_with_key() {
            Some(true) => ", and the verdict agrees with it",
            Some(false) => ": <strong>the verdict disagrees with it</strong>",
            None => "",
        };
        put!(
            out,
            "<p class=\"key-answer\">Answer key (the simulated truth): <strong>{}</strong>{agreement}.</p>",
            esc(&key.label)
        );
    }
    if p.reasons.is_empty() {
        if p.verdict == VerdictKind::Review {
            out.push_str("<p class=\"muted\">No specific reason was recorded.</p>");
        }
    } else {
        out.push_str("<ul class=\"reasons\">");
        for (code, text) in &p.reasons {
            put!(out, "<li>{} <code>{}</code></li>", esc(text), esc(code));
        }
        out.push_str("</ul>");
    }
    if let Some(d) = &p.decision {
        let agrees = match (d.decision.as_str(), p.verdict) {
            ("causal", VerdictKind::Causal) | ("non-causal", VerdictKind::NonCausal) => {
                "agrees with the model"
            }
            ("unsure", _) | (_, VerdictKind::Review) => "",
            _ => "differs from the model",
        };
        put!(
            out,
            "<p class=\"given\">Reviewer's decision{}: <strong>{}</strong>{}{}{}</p>",
            if d.reviewer.is_empty() {
                String::new()
            } else {
                format!(" ({})", esc(&d.reviewer))
            },
            esc(&d.decision),
            if agrees.is_empty() {
                String::new()
            } else {
                format!(", {agrees}")
            },
            if d.note.is_empty() { "" } else { ". Note: " },
            esc(&d.note)
        );
    }
    decision_form(out, anchor, p);
    out.push_str("</div>\n<div class=\"figs\">\n");

    if p.library_sizes.is_empty() {
        out.push_str("<p class=\"muted\">No skill ensemble was supplied for this pair.</p>\n");
    } else {
        let svg = plots::skill_curves(p, axis)?;
        let reps = p.forward.iter().map(Vec::len).max().unwrap_or(0);
        put!(
            out,
            "<figure class=\"curve\">{svg}<figcaption><b>Does {} drive {}?</b> Skill of recovering {} \
             from the delay embedding of {} as the library grows. <span class=\"sw fwd\"></span> median of {} \
             replicates, shaded {:.0}&ndash;{:.0}%.",
            esc(&p.driver),
            esc(&p.response),
            esc(&p.driver),
            esc(&p.response),
            reps,
            BAND.0 * 100.0,
            BAND.1 * 100.0
        );
        match (&p.reverse, &p.reverse_library_sizes) {
            (Some(_), None) => put!(
                out,
                " <span class=\"sw rev\"></span> dashed: the opposite hypothesis, {} drives {} \
                 (skill of recovering {} from the embedding of {}). Only the direction whose \
                 curve rises and levels off above the surrogates is evidence of driving; when \
                 both rise, strong one-way forcing can make them converge together.",
                esc(&p.response),
                esc(&p.driver),
                esc(&p.response),
                esc(&p.driver)
            ),
            (Some(_), Some(sizes)) => put!(
                out,
                " <span class=\"sw rev\"></span> dashed: the opposite hypothesis, {} drives {}, \
                 drawn at its own library sizes ({} to {}): the embedding of {} leaves a different \
                 number of usable points, so its sizes differ. Only the direction whose curve \
                 rises and levels off above the surrogates is evidence of driving.",
                esc(&p.response),
                esc(&p.driver),
                sizes.first().copied().unwrap_or(0),
                sizes.last().copied().unwrap_or(0),
                esc(&p.driver)
            ),
            (None, _) => put!(
                out,
                " The opposite hypothesis ({} drives {}) is not drawn: the input holds no \
                 ensemble for it.",
                esc(&p.response),
                esc(&p.driver)
            ),
        }
        if let Some(s) = &p.surrogate_skills {
            let l_max = p.library_sizes.iter().max().copied().unwrap_or(0);
            put!(
                out,
                " <span class=\"sw sur\"></span> {} surrogate drivers at library size {}, \
                 {:.0}&ndash;{:.0}% and median.",
                s.len(),
                l_max,
                SURROGATE_BAND.0 * 100.0,
                SURROGATE_BAND.1 * 100.0
            );
        }
        if let Some(s) = &p.seasonal_surrogate_skills {
            put!(
                out,
                " <span class=\"sw sea\"></span> {} seasonal surrogates (the driver's own \
                 cycle kept, its anomalies scrambled), same range: skill that does not clear \
                 them is explained by a shared rhythm.",
                s.len()
            );
        }
        out.push_str("</figcaption></figure>\n");
    }

    if let Some((lags, skill)) = &p.lag_profile {
        if lags.is_empty() {
            out.push_str("<p class=\"muted\">The lag profile is empty.</p>\n");
        } else {
            let svg = plots::lag_profile(lags, skill)?;
            put!(
                out,
                "<figure class=\"lag\">{svg}<figcaption><b>Lag profile, {} &rarr; {}.</b> Skill of recovering {} \
                 at time t + lag from {} at time t.",
                esc(&p.driver),
                esc(&p.response),
                esc(&p.driver),
                esc(&p.response)
            );
            if let Some((l, s)) = plots::best_lag(lags, skill) {
                put!(
                    out,
                    " Best at lag {l} (ringed, skill {}). A driver usually leaves its best footprint at lag &le; 0 \
                     (Ye et al. 2015).",
                    fmt_value(Some(s))
                );
            }
            out.push_str("</figcaption></figure>\n");
        }
    }
    if !p.key_features.is_empty() {
        out.push_str("<table class=\"features\"><caption>Key features</caption><tbody>");
        for (name, v) in &p.key_features {
            put!(
                out,
                "<tr><th scope=\"row\">{}</th><td class=\"num\">{}</td></tr>",
                esc(name),
                fmt_value(*v)
            );
        }
        out.push_str("</tbody></table>\n");
    }
    out.push_str("</div>\n");
    out.push_str("</div>\n</details>\n");
    Ok(())
}

/// Median forward skill at the largest library size, for the compact table.
fn final_median(rows: &[Vec<f64>]) -> Option<f64> {
    rows.last().and_then(|r| quantile(r, 0.5))
}

fn compact_table(out: &mut String, data: &ReportData, rest: &[usize], rank: &[usize], cap: usize) {
    put!(
        out,
        "<section id=\"compact\" class=\"group\">\n<h2>Further pairs, in brief <span class=\"n\">({})</span></h2>\n\
         <p class=\"lead\">Plots are drawn for the first {cap} pairs in the order above; the remaining pairs are listed here \
         in the same order. Their full data are in the run's output files.</p>\n\
         <div class=\"scroll tall\"><table id=\"compact-table\"><thead><tr><th>verdict</th><th>question</th>\
         <th>p</th><th title=\"median skill at the largest library size\">skill, driver &rarr; response</th>\
         <th title=\"median skill at the largest library size\">skill, response &rarr; driver</th><th>reasons</th></tr></thead><tbody>\n",
        rest.len()
    );
    for &k in rest {
        let p = &data.pairs[k];
        put!(out, "<tr id=\"{}\"><td>", pair_anchor(rank[k]));
        badge(out, p.verdict);
        out.push_str("</td><td>");
        question(out, p);
        put!(
            out,
            "</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td>",
            fmt_p(p.p_causal),
            fmt_value(final_median(&p.forward)),
            fmt_value(p.reverse.as_deref().and_then(final_median))
        );
        for (i, (code, text)) in p.reasons.iter().enumerate() {
            if i > 0 {
                out.push_str("; ");
            }
            put!(
                out,
                "<span title=\"{}\"><code>{}</code></span>",
                esc(text),
                esc(code)
            );
        }
        out.push_str("</td></tr>\n");
    }
    out.push_str("</tbody></table></div>\n</section>\n");
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn values_are_formatted_compactly_and_deterministically() {
        assert_eq!(fmt_value(None), "n/a");
        assert_eq!(fmt_value(Some(f64::NAN)), "n/a");
        assert_eq!(fmt_value(Some(0.0)), "0");
        assert_eq!(fmt_value(Some(0.123456)), "0.123");
        assert_eq!(fmt_value(Some(123456.0)), "1.23e5");
        assert_eq!(fmt_p(0.5), "0.50");
        assert_eq!(fmt_p(1.0), "1.00");
    }

    #[test]
    fn cell_shading_darkens_with_probability_and_keeps_text_readable() {
        let (a, ink_a) = shade(0.29);
        let (b, ink_b) = shade(0.79);
        assert_ne!(a, b, "0.29 and 0.79 must not look alike");
        assert_eq!(shade(0.0).0, "#ffffff");
        assert_eq!((ink_a, ink_b), ("#222630", "#fff"));
        assert_eq!(shade(f64::NAN).0, "#ffffff");
    }

    #[test]
    fn figure_file_names_are_safe() {
        assert_eq!(file_safe("sea temp (°C)"), "sea_temp___C_");
        assert_eq!(file_safe("../x"), "_.._x");
        assert_eq!(file_safe(""), "_");
    }
}
