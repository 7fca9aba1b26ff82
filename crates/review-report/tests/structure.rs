//! Structural checks of the rendered page that need no browser.

mod common;

use review_report::{
    CAUTION, RenderOptions, ReportError, VerdictKind, render_html, render_html_with,
};

fn count(hay: &str, needle: &str) -> usize {
    hay.matches(needle).count()
}

#[test]
fn matrix_has_one_cell_per_ordered_pair_of_variables() {
    let data = common::small();
    let html = render_html(&data).unwrap();
    let n = data.variables.len();
    assert_eq!(count(&html, "data-cell=\""), n * n);
    assert_eq!(count(&html, "class=\"cell diag\""), n);
    // One pair was left out on purpose and must show as not assessed, not vanish.
    assert_eq!(count(&html, "class=\"cell none\""), 1);
    assert!(html.contains("driver &darr;") && html.contains("response &rarr;"));
    assert_eq!(count(&html, "<table id=\"matrix\""), 1);
}

#[test]
fn caution_is_present_and_before_the_matrix() {
    let html = render_html(&common::small()).unwrap();
    let caution = html.find("id=\"caution\"").expect("caution present");
    let matrix = html.find("id=\"matrix\"").unwrap();
    assert!(caution < matrix);
    assert!(html.contains(CAUTION));
}

#[test]
fn review_cases_come_before_causal_before_non_causal() {
    let data = common::small();
    let html = render_html(&data).unwrap();
    let panel_pos = |css: &str| -> Vec<usize> {
        html.match_indices(&format!("<details class=\"pair v-{css}\""))
            .map(|(i, _)| i)
            .collect()
    };
    let (rev, yes, no) = (panel_pos("rev"), panel_pos("yes"), panel_pos("no"));
    let want = |v| data.pairs.iter().filter(|p| p.verdict == v).count();
    assert_eq!(rev.len(), want(VerdictKind::Review));
    assert_eq!(yes.len(), want(VerdictKind::Causal));
    assert_eq!(no.len(), want(VerdictKind::NonCausal));
    assert!(!rev.is_empty() && !yes.is_empty() && !no.is_empty());
    assert!(rev.last() < yes.first());
    assert!(yes.last() < no.first());
    // Review panels start open; the others start collapsed.
    assert_eq!(count(&html, " open>"), rev.len());
}

#[test]
fn every_curve_panel_has_an_svg_figure_with_text() {
    let data = common::small();
    let html = render_html(&data).unwrap();
    // Two figures per pair: skill against library size, and the lag profile.
    assert_eq!(count(&html, "<svg"), 2 * data.pairs.len());
    assert!(count(&html, "<text") > 10 * data.pairs.len());
    // One inline script (the reviewer's decision form), none loaded from anywhere.
    assert_eq!(count(&html, "<script"), 1);
    assert_eq!(count(&html, "<script>"), 1);
    assert!(
        !html.contains("http://")
            || !html
                .replace("http://www.w3.org/2000/svg", "")
                .contains("http://")
    );
    assert!(!html.contains("https://"));
}

#[test]
fn captions_speak_in_driver_response_terms() {
    let html = render_html(&common::small()).unwrap();
    assert!(html.contains("Does <b>temperature</b> drive <b>nitrate &lt;NO3&gt;</b>?"));
    let lower = html.to_lowercase();
    for banned in ["xmap", " maps ", "cross-maps", "cross maps "] {
        assert!(!lower.contains(banned), "found {banned:?}");
    }
}

#[test]
fn user_strings_are_escaped() {
    let html = render_html(&common::small()).unwrap();
    for raw in ["<NO3>", "<sample>", "\"zoo\"", "predator's"] {
        assert!(!html.contains(raw), "unescaped {raw}");
    }
    assert!(html.contains("nitrate &lt;NO3&gt;"));
    assert!(html.contains("algae &amp; diatoms"));
    assert!(html.contains("grazers &quot;zoo&quot;"));
    assert!(html.contains("predator&#39;s count"));
}

#[test]
fn forty_variables_scale_down_and_cap_the_plots() {
    let data = common::wide(40);
    let html = render_html(&data).unwrap();
    assert_eq!(count(&html, "data-cell=\""), 1600);
    assert!(html.contains("class=\"matrix m-s\""));
    let cap = RenderOptions::default().max_panels;
    assert_eq!(count(&html, "<details class=\"pair"), cap);
    assert!(html.contains("id=\"compact-table\""));
    assert_eq!(count(&html, "<tr id=\"pair-"), data.pairs.len() - cap);
    // Every pair stays reachable from the matrix.
    for k in 0..data.pairs.len() {
        assert!(
            html.contains(&format!("id=\"pair-{k}\"")),
            "no anchor for pair {k}"
        );
    }
    let mb = html.len() as f64 / 1e6;
    // 200 panels of two figures with legends inside them, and 1,560 shaded cells.
    assert!(mb < 5.0, "page weighs {mb:.2} MB");
}

#[test]
fn smaller_cap_moves_pairs_to_the_compact_table() {
    let data = common::small();
    let mut opts = RenderOptions::default();
    opts.max_panels = 3;
    let html = render_html_with(&data, &opts).unwrap();
    assert_eq!(count(&html, "<details class=\"pair"), 3);
    assert_eq!(count(&html, "<tr id=\"pair-"), data.pairs.len() - 3);
}

#[test]
fn same_data_gives_the_same_bytes() {
    let a = render_html(&common::wide(12)).unwrap();
    let b = render_html(&common::wide(12)).unwrap();
    assert_eq!(a, b);
    // The order pairs arrive in does not change the page.
    let mut shuffled = common::small();
    shuffled.pairs.reverse();
    shuffled.pairs.swap(0, 7);
    assert_eq!(
        render_html(&shuffled).unwrap(),
        render_html(&common::small()).unwrap()
    );
}

#[test]
fn inconsistent_data_is_refused_with_a_typed_error() {
    let mut d = common::small();
    d.pairs[0].driver = "nowhere".into();
    assert!(matches!(
        render_html(&d),
        Err(ReportError::UnknownVariable { .. })
    ));

    let mut d = common::small();
    let dup = d.pairs[0].clone();
    d.pairs.push(dup);
    assert!(matches!(
        render_html(&d),
        Err(ReportError::DuplicatePair { .. })
    ));

    let mut d = common::small();
    d.pairs[1].p_causal = 1.5;
    assert!(matches!(
        render_html(&d),
        Err(ReportError::InvalidProbability { .. })
    ));

    // NaN marks a pair no model head could score: rendered as "n/a", not refused.
    let mut d = common::small();
    d.pairs[1].p_causal = f64::NAN;
    assert!(render_html(&d).unwrap().contains("n/a"));

    let mut d = common::small();
    d.pairs[2].forward.pop();
    assert!(matches!(
        render_html(&d),
        Err(ReportError::ShapeMismatch { .. })
    ));

    let mut d = common::small();
    d.variables.push(d.variables[0].clone());
    assert!(matches!(
        render_html(&d),
        Err(ReportError::DuplicateVariable(_))
    ));
}

#[test]
fn empty_optional_parts_render() {
    let mut d = common::small();
    d.embeddings.clear();
    d.notes.clear();
    for p in &mut d.pairs {
        p.reverse = None;
        p.lag_profile = None;
        p.surrogate_skills = None;
    }
    let html = render_html(&d).unwrap();
    assert!(html.contains("supplied from elsewhere"));
    assert_eq!(count(&html, "<svg"), d.pairs.len());
}

/// Finding: `label` on 2,000 pairs with distinct names wrote a 1.59 GB report (16 million
/// matrix cells). Above `MATRIX_MAX_VARIABLES` variables the matrix becomes a heat map of
/// the assessed pairs, panels stay capped, and the page holds every pair in the compact
/// table; at 2,000 pairs (4,000 variables) it stays under the documented 50 MB.
#[test]
fn report_of_many_variables_grows_with_the_pairs_not_their_square() {
    let mut data = common::small();
    let mut g = common::Gen::new(5);
    let kinds = [
        VerdictKind::Review,
        VerdictKind::Causal,
        VerdictKind::NonCausal,
    ];
    data.variables.clear();
    data.embeddings.clear();
    data.pairs.clear();
    for k in 0..2000 {
        let (d, r) = (format!("driver {k}"), format!("response {k}"));
        data.variables.push(d.clone());
        data.variables.push(r.clone());
        data.pairs
            .push(common::pair(&mut g, &d, &r, kinds[k % 3], false));
    }
    let html = render_html(&data).unwrap();
    eprintln!("2,000 pairs, 4,000 variables: {} bytes", html.len());
    assert!(html.len() < 50_000_000, "{} bytes", html.len());
    assert!(!html.contains("id=\"matrix\""));
    let start = html.find("id=\"heat-map\"").expect("heat map present");
    let figure = &html[start..start + html[start..].find("</figure>").unwrap()];
    assert_eq!(count(figure, "<rect x="), 2000);
    assert!(count(&html, "<details class=\"pair") <= RenderOptions::default().max_panels);
    assert!(html.contains("driver 1999"), "every pair is listed");
    // At 60 variables the matrix is still drawn.
    let html = render_html(&common::wide(60)).unwrap();
    assert!(html.contains("id=\"matrix\"") && !html.contains("id=\"heat-map\""));
}

/// The y-axis tick labels of one SVG figure (the skill axis labels are one-decimal numbers).
fn skill_ticks(svg: &str) -> Vec<String> {
    svg.split("<text")
        .filter_map(|t| t.split('>').nth(1))
        .map(|t| t.trim().trim_end_matches("</text").trim().to_string())
        .filter(|t| t.contains('.') && t.parse::<f64>().is_ok())
        .collect()
}

#[test]
fn a_shared_skill_axis_gives_every_figure_the_same_scale() {
    let data = common::small();
    let own = review_report::pair_figures(&data, &RenderOptions::default(), 100).unwrap();
    let shared = review_report::pair_figures(
        &data,
        &RenderOptions::default().with_shared_skill_axis(true),
        100,
    )
    .unwrap();
    assert_eq!(own.len(), data.pairs.len());
    let first = skill_ticks(&shared[0].svg);
    assert!(!first.is_empty());
    assert!(shared.iter().all(|f| skill_ticks(&f.svg) == first));
    // Without it, the axes follow each pair (the test data's pairs differ in height).
    assert!(
        own.iter()
            .any(|f| skill_ticks(&f.svg) != skill_ticks(&own[0].svg))
    );
    // One file per pair, named uniquely, review pairs first.
    let mut names: Vec<&str> = own.iter().map(|f| f.file_name.as_str()).collect();
    assert!(names[0].starts_with("0001-"));
    names.sort();
    names.dedup();
    assert_eq!(names.len(), data.pairs.len());
}

#[test]
fn matrix_cells_are_shaded_by_probability() {
    let html = render_html(&common::small()).unwrap();
    let fills: std::collections::BTreeSet<&str> = html
        .split("style=\"background:")
        .skip(1)
        .filter_map(|s| s.split(';').next())
        .collect();
    assert!(fills.len() > 3, "{fills:?}");
}
