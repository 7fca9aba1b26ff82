//! SVG figures for one pair, drawn with plotters' SVG backend.

use plotters::element::DashedPathElement;
use plotters::prelude::*;

use crate::ReportError;
use crate::model::PairView;
use crate::stats::{BAND, Spread, quantile, spreads};

/// Plot width and height in CSS pixels.
const SIZE: (u32, u32) = (440, 300);
/// Lag profile plot size.
const LAG_SIZE: (u32, u32) = (340, 270);

/// The evidence for the hypothesis in question: a deep blue.
pub(crate) const FORWARD: RGBColor = RGBColor(0x1d, 0x4e, 0x89);
/// The opposite hypothesis: a muted plum, drawn dashed.
pub(crate) const REVERSE: RGBColor = RGBColor(0xa1, 0x3d, 0x63);
/// Surrogate drivers: a warm grey.
pub(crate) const SURROGATE: RGBColor = RGBColor(0x7a, 0x70, 0x66);
/// Seasonal surrogate drivers: a muted teal.
pub(crate) const SEASONAL: RGBColor = RGBColor(0x2f, 0x7a, 0x6d);
/// Tick label and axis title sizes in CSS pixels; plotters' SVG backend divides the
/// requested size by 1.24, so whole pixel sizes are requested scaled up to keep the output short.
const LABEL_PX: f64 = 12.0;
const DESC_PX: f64 = 14.0;
const INK: RGBColor = RGBColor(0x22, 0x26, 0x30);
const GRID: RGBColor = RGBColor(0xe3, 0xe1, 0xdc);

/// Surrogate range shown at the largest library size: the central 90%.
pub(crate) const SURROGATE_BAND: (f64, f64) = (0.05, 0.95);

fn plot_err<E: std::fmt::Display>(figure: &str) -> impl Fn(E) -> ReportError + '_ {
    move |e| ReportError::Plot {
        figure: figure.to_owned(),
        message: e.to_string(),
    }
}

/// The legend of a figure, inside it at the upper left (the figures leave head room for it).
fn draw_legend<'a, X, Y>(
    chart: &mut ChartContext<'a, SVGBackend<'a>, Cartesian2d<X, Y>>,
    figure: &str,
) -> Result<(), ReportError>
where
    X: Ranged,
    Y: Ranged,
{
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperLeft)
        .margin(6)
        .legend_area_size(24)
        .background_style(WHITE.mix(0.88))
        .border_style(GRID)
        .label_font(("sans-serif", LABEL_PX * 1.24).into_font().color(&INK))
        .draw()
        .map_err(plot_err(figure))
}

/// Rounds an axis bound outward to a multiple of 0.1 so tick labels stay tidy.
fn y_bounds(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    // Skill 0 is the reference line every reader looks for, so keep it in view.
    let lo = ((lo.min(0.0) - 0.02) * 10.0).floor() / 10.0;
    let hi = ((hi.max(lo + 0.2) + 0.02) * 10.0).ceil() / 10.0;
    (lo.max(-1.0), hi.min(1.0).max(lo + 0.1))
}

/// Library-size ticks: whole sizes without a decimal point ("5", "10", "20"), so that one
/// axis never mixes "5.0" with "10".
fn fmt_size(v: &f64) -> String {
    if v.fract() == 0.0 || *v >= 10.0 {
        format!("{v:.0}")
    } else {
        format!("{v:.1}")
    }
}

fn fmt_skill(v: &f64) -> String {
    let s = format!("{:.1}", v);
    if s == "-0.0" { "0.0".to_owned() } else { s }
}

/// Round tick values for a log axis: 1-2-5 per decade, or finer steps when the range
/// spans less than a decade and would otherwise get fewer than three ticks.
fn log_ticks(lo: f64, hi: f64) -> Vec<f64> {
    let pick = |mantissas: &[f64]| -> Vec<f64> {
        let first = lo.log10().floor() as i32;
        let last = hi.log10().ceil() as i32;
        (first..=last)
            .flat_map(|d| mantissas.iter().map(move |m| m * 10f64.powi(d)))
            .filter(|v| *v >= lo && *v <= hi)
            .collect()
    };
    let coarse = pick(&[1.0, 2.0, 5.0]);
    if coarse.len() >= 3 {
        coarse
    } else {
        pick(&[1.0, 1.5, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0])
    }
}

/// Points of a spread band as one closed outline: lower edge out, upper edge back.
fn band_outline(xs: &[f64], sp: &[Option<Spread>]) -> Vec<(f64, f64)> {
    let pts: Vec<(f64, Spread)> = xs
        .iter()
        .zip(sp)
        .filter_map(|(x, s)| s.map(|s| (*x, s)))
        .collect();
    let mut out: Vec<(f64, f64)> = pts.iter().map(|(x, s)| (*x, s.lo)).collect();
    out.extend(pts.iter().rev().map(|(x, s)| (*x, s.hi)));
    out
}

fn medians(xs: &[f64], sp: &[Option<Spread>]) -> Vec<(f64, f64)> {
    xs.iter()
        .zip(sp)
        .filter_map(|(x, s)| s.map(|s| (*x, s.mid)))
        .collect()
}

/// A name shortened for a legend inside the figure.
fn short(name: &str) -> String {
    const MAX: usize = 16;
    if name.chars().count() <= MAX {
        name.to_owned()
    } else {
        let mut s: String = name.chars().take(MAX - 1).collect();
        s.push('…');
        s
    }
}

/// Every skill value a pair's skill figure draws: the forward and opposite spread bands and
/// the surrogate ranges (for the y-axis, alone or shared across pairs).
fn drawn_skills(pair: &PairView) -> Vec<f64> {
    let fwd = spreads(&pair.forward, BAND);
    let rev = pair.reverse.as_ref().map(|r| spreads(r, BAND));
    let range = |s: &Vec<f64>| {
        Some([
            quantile(s, SURROGATE_BAND.0)?,
            quantile(s, SURROGATE_BAND.1)?,
        ])
    };
    fwd.iter()
        .chain(rev.iter().flatten())
        .flatten()
        .flat_map(|s| [s.lo, s.hi])
        .chain(
            pair.surrogate_skills
                .iter()
                .chain(&pair.seasonal_surrogate_skills)
                .filter_map(range)
                .flatten(),
        )
        .collect()
}

/// One skill-axis range for every pair's figure, so that heights compare across pairs.
pub(crate) fn shared_skill_axis(pairs: &[PairView]) -> (f64, f64) {
    y_bounds(pairs.iter().flat_map(drawn_skills))
}

/// The skill-against-library-size figure: forward ensemble, the opposite direction (at its
/// own library sizes when they differ), the surrogate ranges, and a legend inside the figure.
/// The skill axis fits this pair's values, or is `axis` when given (shared across pairs).
pub(crate) fn skill_curves(
    pair: &PairView,
    axis: Option<(f64, f64)>,
) -> Result<String, ReportError> {
    const FIG: &str = "skill against library size";
    let xs: Vec<f64> = pair.library_sizes.iter().map(|&l| l as f64).collect();
    let rev_xs: Vec<f64> = pair
        .reverse_library_sizes
        .as_ref()
        .unwrap_or(&pair.library_sizes)
        .iter()
        .map(|&l| l as f64)
        .collect();
    let fwd = spreads(&pair.forward, BAND);
    let rev = pair.reverse.as_ref().map(|r| spreads(r, BAND));
    let band = |s: &Vec<f64>| {
        Some((
            quantile(s, SURROGATE_BAND.0)?,
            quantile(s, 0.5)?,
            quantile(s, SURROGATE_BAND.1)?,
        ))
    };
    let sur = pair.surrogate_skills.as_ref().and_then(band);
    let seasonal = pair.seasonal_surrogate_skills.as_ref().and_then(band);

    // The forward sizes set where the surrogate bars stand (they are at its largest size).
    let x_max = xs.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let shown_xs = || {
        xs.iter()
            .chain(if rev.is_some() { &rev_xs[..] } else { &[] })
    };
    let all_min = shown_xs().copied().fold(f64::INFINITY, f64::min);
    let all_max = shown_xs().copied().fold(f64::NEG_INFINITY, f64::max);
    // Log spacing matches how library sizes are drawn; the margin leaves room for the surrogate bar.
    let (x_lo, x_hi) = if all_max / all_min < 1.5 {
        (all_min / 2.0, all_max * 2.0)
    } else {
        (all_min / 1.15, all_max.max(x_max * 1.25) * 1.12)
    };
    let (y_lo, y_hi) = axis.unwrap_or_else(|| y_bounds(drawn_skills(pair).into_iter()));
    // Head room for the legend inside the figure, above the curves.
    let entries = 1
        + usize::from(rev.is_some())
        + usize::from(sur.is_some())
        + usize::from(seasonal.is_some());
    // The legend takes about 19 px a line plus its margins out of the plot area's height.
    let plot_px = f64::from(SIZE.1) - 56.0;
    let free = ((entries as f64 * 19.0 + 16.0) / plot_px).min(0.6);
    let y_hi = y_lo + (y_hi - y_lo) / (1.0 - free);

    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(plot_err(FIG))?;
        let mut chart = ChartBuilder::on(&root)
            .margin(8)
            .margin_right(16)
            .x_label_area_size(40)
            .y_label_area_size(48)
            .build_cartesian_2d(
                (x_lo..x_hi)
                    .log_scale()
                    .with_key_points(log_ticks(x_lo, x_hi)),
                y_lo..y_hi,
            )
            .map_err(plot_err(FIG))?;
        chart
            .configure_mesh()
            .max_light_lines(0)
            .bold_line_style(GRID)
            .axis_style(INK.mix(0.6))
            .x_labels(6)
            .y_labels(6)
            .x_label_formatter(&fmt_size)
            .y_label_formatter(&fmt_skill)
            .x_desc("library size (points)")
            .y_desc("cross-map skill")
            .label_style(("sans-serif", LABEL_PX * 1.24).into_font().color(&INK))
            .axis_desc_style(("sans-serif", DESC_PX * 1.24).into_font().color(&INK))
            .draw()
            .map_err(plot_err(FIG))?;

        // Zero skill: the line below which there is no evidence at all.
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(x_lo, 0.0), (x_hi, 0.0)],
                INK.mix(0.35),
            )))
            .map_err(plot_err(FIG))?;

        // Seasonal surrogates, when present, stand just right of the phase-randomised ones;
        // the legend names both, so no label is drawn beside the bars.
        let bars = [
            (
                seasonal,
                SEASONAL,
                x_max * 1.1,
                x_max * 1.25,
                "seasonal surrogates",
            ),
            (
                sur,
                SURROGATE,
                x_max / 1.06,
                x_max * 1.06,
                "surrogates (90% range)",
            ),
        ];
        for (kind, colour, a, b, name) in bars {
            let Some((s_lo, s_mid, s_hi)) = kind else {
                continue;
            };
            chart
                .draw_series([
                    Rectangle::new([(a, s_lo), (b, s_hi)], colour.mix(0.28).filled()),
                    Rectangle::new([(a, s_lo), (b, s_hi)], colour.stroke_width(1)),
                ])
                .map_err(plot_err(FIG))?
                .label(name)
                .legend(move |(x, y)| {
                    Rectangle::new([(x, y - 5), (x + 18, y + 5)], colour.mix(0.5).filled())
                });
            chart
                .draw_series(std::iter::once(PathElement::new(
                    vec![(a, s_mid), (b, s_mid)],
                    colour.stroke_width(2),
                )))
                .map_err(plot_err(FIG))?;
        }

        if let Some(rev) = &rev {
            let outline = band_outline(&rev_xs, rev);
            if outline.len() >= 4 {
                chart
                    .draw_series(std::iter::once(Polygon::new(
                        outline,
                        REVERSE.mix(0.13).filled(),
                    )))
                    .map_err(plot_err(FIG))?;
            }
            let mids = medians(&rev_xs, rev);
            // A lone size draws no line, so its median gets a mark.
            chart
                .draw_series(mids.iter().map(|&p| Circle::new(p, 2, REVERSE.filled())))
                .map_err(plot_err(FIG))?;
            chart
                .draw_series(std::iter::once(DashedPathElement::new(
                    mids,
                    9,
                    6,
                    REVERSE.stroke_width(2),
                )))
                .map_err(plot_err(FIG))?
                .label(format!(
                    "{} \u{2192} {} (opposite)",
                    short(&pair.response),
                    short(&pair.driver)
                ))
                .legend(|(x, y)| {
                    DashedPathElement::new(vec![(x, y), (x + 18, y)], 5, 3, REVERSE.stroke_width(2))
                });
        }

        let outline = band_outline(&xs, &fwd);
        if outline.len() >= 4 {
            chart
                .draw_series(std::iter::once(Polygon::new(
                    outline,
                    FORWARD.mix(0.22).filled(),
                )))
                .map_err(plot_err(FIG))?;
        }
        let mids = medians(&xs, &fwd);
        chart
            .draw_series(std::iter::once(PathElement::new(
                mids.clone(),
                FORWARD.stroke_width(2),
            )))
            .map_err(plot_err(FIG))?
            .label(format!(
                "{} \u{2192} {} (median)",
                short(&pair.driver),
                short(&pair.response)
            ))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], FORWARD.stroke_width(2)));
        chart
            .draw_series(mids.iter().map(|&p| Circle::new(p, 3, FORWARD.filled())))
            .map_err(plot_err(FIG))?;
        draw_legend(&mut chart, FIG)?;
        root.present().map_err(plot_err(FIG))?;
    }
    Ok(svg)
}

/// The lag profile figure: skill against cross-map lag, best lag marked.
pub(crate) fn lag_profile(lags: &[i32], skill: &[f64]) -> Result<String, ReportError> {
    const FIG: &str = "lag profile";
    let pts: Vec<(f64, f64)> = lags
        .iter()
        .zip(skill)
        .filter(|(_, s)| s.is_finite())
        .map(|(&l, &s)| (l as f64, s))
        .collect();
    let l_min = lags.iter().copied().min().unwrap_or(0).min(0) as f64;
    let l_max = lags.iter().copied().max().unwrap_or(0).max(0) as f64;
    let (x_lo, x_hi) = (l_min - 0.5, l_max + 0.5);
    let (y_lo, y_hi) = y_bounds(pts.iter().map(|p| p.1));
    // Head room for the two-line legend inside the figure, above the profile.
    let plot_px = f64::from(LAG_SIZE.1) - 56.0;
    let y_hi = y_lo + (y_hi - y_lo) / (1.0 - ((2.0 * 19.0 + 16.0) / plot_px).min(0.6));
    let best = best_lag(lags, skill).map(|(l, s)| (l as f64, s));

    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, LAG_SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(plot_err(FIG))?;
        let mut chart = ChartBuilder::on(&root)
            .margin(8)
            .margin_right(16)
            .x_label_area_size(40)
            .y_label_area_size(48)
            .build_cartesian_2d(x_lo..x_hi, y_lo..y_hi)
            .map_err(plot_err(FIG))?;
        let fmt_lag = |v: &f64| format!("{:.0}", v);
        chart
            .configure_mesh()
            .max_light_lines(0)
            .bold_line_style(GRID)
            .axis_style(INK.mix(0.6))
            .x_labels(9)
            .y_labels(6)
            .x_label_formatter(&fmt_lag)
            .y_label_formatter(&fmt_skill)
            .x_desc("cross-map lag (time steps)")
            .y_desc("cross-map skill")
            .label_style(("sans-serif", LABEL_PX * 1.24).into_font().color(&INK))
            .axis_desc_style(("sans-serif", DESC_PX * 1.24).into_font().color(&INK))
            .draw()
            .map_err(plot_err(FIG))?;
        chart
            .draw_series([
                PathElement::new(vec![(x_lo, 0.0), (x_hi, 0.0)], INK.mix(0.35)),
                PathElement::new(vec![(0.0, y_lo), (0.0, y_hi)], INK.mix(0.35)),
            ])
            .map_err(plot_err(FIG))?;
        chart
            .draw_series(std::iter::once(PathElement::new(
                pts.clone(),
                FORWARD.stroke_width(2),
            )))
            .map_err(plot_err(FIG))?
            .label("skill at each lag")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], FORWARD.stroke_width(2)));
        chart
            .draw_series(pts.iter().map(|&p| Circle::new(p, 2, FORWARD.filled())))
            .map_err(plot_err(FIG))?;
        if let Some(b) = best {
            chart
                .draw_series([
                    Circle::new(b, 6, FORWARD.stroke_width(2)),
                    Circle::new(b, 3, FORWARD.filled()),
                ])
                .map_err(plot_err(FIG))?
                .label("best lag")
                .legend(|(x, y)| Circle::new((x + 9, y), 5, FORWARD.stroke_width(2)));
        }
        draw_legend(&mut chart, FIG)?;
        root.present().map_err(plot_err(FIG))?;
    }
    Ok(svg)
}

/// The lag with the highest finite skill (ties to the lag nearest zero).
pub(crate) fn best_lag(lags: &[i32], skill: &[f64]) -> Option<(i32, f64)> {
    lags.iter().zip(skill).filter(|(_, s)| s.is_finite()).fold(
        None::<(i32, f64)>,
        |acc, (&l, &s)| match acc {
            Some(a) if a.1 > s || (a.1 == s && a.0.abs() <= l.abs()) => Some(a),
            _ => Some((l, s)),
        },
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::VerdictKind;

    fn pair() -> PairView {
        PairView {
            driver: "a<b".into(),
            response: "c&d".into(),
            p_causal: 0.5,
            verdict: VerdictKind::Review,
            reasons: vec![],
            library_sizes: vec![10, 20, 40, 80],
            forward: vec![
                vec![0.1, 0.2, 0.15],
                vec![0.3, 0.35, 0.4],
                vec![0.5, 0.55, 0.6],
                vec![0.7, 0.72, 0.74],
            ],
            reverse: Some(vec![
                vec![0.1; 3],
                vec![0.12; 3],
                vec![0.1; 3],
                vec![0.11; 3],
            ]),
            reverse_library_sizes: None,
            decision: None,
            lag_profile: None,
            surrogate_skills: Some(vec![0.0, 0.05, 0.1, -0.05]),
            seasonal_surrogate_skills: Some(vec![0.2, 0.25, 0.3]),
            key_features: vec![],
            answer_key: None,
        }
    }

    #[test]
    fn skill_plot_is_svg_with_text_labels() {
        let svg = skill_curves(&pair(), None).unwrap();
        assert!(svg.starts_with("<svg"));
        // Without a font library the SVG backend still emits real <text> elements.
        assert!(svg.contains("<text"));
        assert!(svg.contains("library size"));
        assert!(svg.contains("<polygon"));
    }

    #[test]
    fn reverse_is_drawn_at_its_own_sizes_with_a_legend_inside() {
        let mut p = pair();
        p.reverse_library_sizes = Some(vec![12, 25, 50, 160]);
        let svg = skill_curves(&p, None).unwrap();
        // The legend names both directions and the surrogates inside the figure.
        assert!(svg.contains("a&lt;b \u{2192} c&amp;d (median)"), "{svg}");
        assert!(svg.contains("c&amp;d \u{2192} a&lt;b (opposite)"));
        assert!(svg.contains("surrogates (90% range)"));
        assert!(svg.contains("seasonal surrogates"));
        // The axis reaches the reverse curve's largest size (160), past the forward's (80).
        assert!(
            svg.contains(">\n100\n<"),
            "a tick at 100 must be shown: {svg}"
        );
    }

    #[test]
    fn size_ticks_never_mix_decimals_with_whole_numbers() {
        assert_eq!(fmt_size(&5.0), "5");
        assert_eq!(fmt_size(&10.0), "10");
        assert_eq!(fmt_size(&1.5), "1.5");
    }

    #[test]
    fn log_ticks_are_round_and_inside_the_range() {
        assert_eq!(
            log_ticks(13.0, 500.0),
            vec![20.0, 50.0, 100.0, 200.0, 500.0]
        );
        let fine = log_ticks(40.0, 90.0);
        assert!(fine.len() >= 3 && fine.iter().all(|v| (40.0..=90.0).contains(v)));
    }

    #[test]
    fn single_size_and_missing_values_do_not_fail() {
        let mut p = pair();
        p.library_sizes = vec![50];
        p.forward = vec![vec![f64::NAN, 0.4]];
        p.reverse = Some(vec![vec![f64::NAN]]);
        p.surrogate_skills = Some(vec![f64::NAN]);
        assert!(skill_curves(&p, None).unwrap().contains("<svg"));
    }

    #[test]
    fn best_lag_prefers_highest_skill_then_nearest_zero() {
        assert_eq!(
            best_lag(&[-2, -1, 0, 1], &[0.5, 0.7, 0.6, 0.7]),
            Some((-1, 0.7))
        );
        assert_eq!(best_lag(&[-1, 0, 1], &[0.4, 0.4, f64::NAN]), Some((0, 0.4)));
        assert_eq!(best_lag(&[0], &[f64::NAN]), None);
        let lag = lag_profile(&[-3, -2, -1, 0, 1], &[0.1, 0.3, 0.5, 0.4, 0.2]).unwrap();
        assert!(lag.contains("<text"));
        // Its legend sits inside the figure.
        assert!(lag.contains("skill at each lag") && lag.contains("best lag"));
    }
}
