//! Verdict policy: turns a prediction and data-quality flags into causal / non-causal /
//! review, with short reason codes for every review.
//!
//! | code | reason | sends to review when |
//! |---|---|---|
//! | `uncertain` | [`Reason::Uncertain`] | the calibrated probability lies inside the policy band |
//! | `unfamiliar` | [`Reason::Unfamiliar`] | the features lie beyond the training-distance percentile |
//! | `short-series` | [`Reason::ShortSeries`] | the series is too short for the library sizes |
//! | `weak-self-forecast` | [`Reason::WeakSelfForecast`] | the response is barely predictable from its own past |
//! | `synchrony` | [`Reason::Synchrony`] | both directions converge and the lag profile suggests synchrony |
//! | `curve-only` | [`Reason::CurveOnly`] | only the curve-only head could score the pair and the policy asks to review that |
//! | `missing-features` | [`Reason::MissingFeatures`] | no head could score the pair |
//!
//! A verdict is `review` exactly when the reason list is non-empty; otherwise it is `causal`
//! for `p >= 0.5` and `non-causal` below.

use serde::{Deserialize, Serialize};

use crate::{Head, Prediction, QualityFlags, Verdict};

/// Why a pair was sent to review.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[non_exhaustive]
pub enum Reason {
    /// Probability inside the uncertainty band.
    Uncertain,
    /// Features unlike the training data.
    Unfamiliar,
    /// Series too short for the chosen library sizes.
    ShortSeries,
    /// Response barely predictable from its own past.
    WeakSelfForecast,
    /// Both directions converge with a synchrony-like lag profile.
    Synchrony,
    /// Scored by the curve-only head (review only when the policy asks).
    CurveOnly,
    /// No head could score the pair.
    MissingFeatures,
}

impl Reason {
    /// Every reason, in the order they are listed.
    pub const ALL: [Reason; 7] = [
        Reason::Uncertain,
        Reason::Unfamiliar,
        Reason::ShortSeries,
        Reason::WeakSelfForecast,
        Reason::Synchrony,
        Reason::CurveOnly,
        Reason::MissingFeatures,
    ];

    /// Short code used in `labels.csv`.
    pub fn code(self) -> &'static str {
        match self {
            Reason::Uncertain => "uncertain",
            Reason::Unfamiliar => "unfamiliar",
            Reason::ShortSeries => "short-series",
            Reason::WeakSelfForecast => "weak-self-forecast",
            Reason::Synchrony => "synchrony",
            Reason::CurveOnly => "curve-only",
            Reason::MissingFeatures => "missing-features",
        }
    }

    /// Plain-words explanation for the report.
    pub fn explain(self) -> &'static str {
        match self {
            Reason::Uncertain => {
                "The model's probability lies inside the review band: the evidence leans one way but not far enough to decide."
            }
            Reason::Unfamiliar => {
                "The pair's features are unlike anything the model was trained on, so its probability may not hold."
            }
            Reason::ShortSeries => {
                "The series is too short for the library sizes needed to see convergence."
            }
            Reason::WeakSelfForecast => {
                "The response can barely be forecast from its own past, so its delay embedding carries little information."
            }
            Reason::Synchrony => {
                "Both directions converge and the best cross-map lag suggests the variables move in lockstep, as under strong forcing."
            }
            Reason::CurveOnly => {
                "Only the skill curves were available; lag and surrogate evidence could not be used."
            }
            Reason::MissingFeatures => {
                "Too many features were unavailable for any model head to score the pair."
            }
        }
    }

    /// The reason for a code, if any.
    pub fn from_code(code: &str) -> Option<Reason> {
        Reason::ALL.into_iter().find(|r| r.code() == code)
    }
}

/// The default review band: a decided pair is right at least 70 % of the time when the
/// probabilities are calibrated, and on the validation suite of published systems it sends
/// about a quarter of the pairs to review (the model card gives the measured rate).
pub const DEFAULT_BAND: (f64, f64) = (0.3, 0.7);

/// [`DEFAULT_BAND`] as the command line writes it.
pub const DEFAULT_BAND_TEXT: &str = "0.3,0.7";

/// Settings of the verdict policy.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct VerdictPolicy {
    /// Probabilities `lo <= p <= hi` go to review as `uncertain`.
    pub band: (f64, f64),
    /// Whether a prediction from the curve-only head goes to review.
    pub review_curve_only: bool,
}

impl Default for VerdictPolicy {
    fn default() -> Self {
        VerdictPolicy {
            band: DEFAULT_BAND,
            review_curve_only: false,
        }
    }
}

fn flag_reasons(flags: &QualityFlags, out: &mut Vec<Reason>) {
    if flags.short_series {
        out.push(Reason::ShortSeries);
    }
    if flags.weak_self_forecast {
        out.push(Reason::WeakSelfForecast);
    }
    if flags.synchrony_suspected {
        out.push(Reason::Synchrony);
    }
}

/// Applies the policy: review with every applicable reason, else causal when `p >= 0.5`.
pub fn decide(
    pred: &Prediction,
    flags: &QualityFlags,
    policy: &VerdictPolicy,
) -> (Verdict, Vec<Reason>) {
    let mut reasons = Vec::new();
    let (lo, hi) = policy.band;
    if pred.p_causal >= lo && pred.p_causal <= hi {
        reasons.push(Reason::Uncertain);
    }
    if pred.ood {
        reasons.push(Reason::Unfamiliar);
    }
    flag_reasons(flags, &mut reasons);
    if policy.review_curve_only && pred.head == Head::CurveOnly {
        reasons.push(Reason::CurveOnly);
    }
    let verdict = if !reasons.is_empty() {
        Verdict::Review
    } else if pred.p_causal >= 0.5 {
        Verdict::Causal
    } else {
        Verdict::NonCausal
    };
    (verdict, reasons)
}

/// The verdict for a pair no head could score ([`crate::ModelError::MissingFeatures`]).
pub fn decide_unusable(flags: &QualityFlags) -> (Verdict, Vec<Reason>) {
    let mut reasons = vec![Reason::MissingFeatures];
    flag_reasons(flags, &mut reasons);
    (Verdict::Review, reasons)
}

/// The `reasons` field of `labels.csv`: codes joined by `;`, empty when none.
pub fn reasons_field(reasons: &[Reason]) -> String {
    reasons
        .iter()
        .map(|r| r.code())
        .collect::<Vec<_>>()
        .join(";")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pred(p: f64, ood: bool, head: Head) -> Prediction {
        Prediction {
            p_causal: p,
            head,
            ood_score: 0.0,
            ood,
            ood_threshold: 1.0,
            fine: None,
        }
    }

    #[test]
    fn band_text_matches_the_band() {
        let (lo, hi) = DEFAULT_BAND;
        assert_eq!(DEFAULT_BAND_TEXT, format!("{lo},{hi}"));
    }

    #[test]
    fn policy_table() {
        let pol = VerdictPolicy::default();
        let none = QualityFlags::default();
        assert_eq!(
            decide(&pred(0.9, false, Head::Full), &none, &pol),
            (Verdict::Causal, vec![])
        );
        assert_eq!(
            decide(&pred(0.1, false, Head::Full), &none, &pol),
            (Verdict::NonCausal, vec![])
        );
        assert_eq!(
            decide(&pred(0.6, true, Head::Full), &none, &pol),
            (Verdict::Review, vec![Reason::Uncertain, Reason::Unfamiliar])
        );
        let flags = QualityFlags {
            synchrony_suspected: true,
            ..Default::default()
        };
        let (v, r) = decide(&pred(0.95, false, Head::CurveOnly), &flags, &pol);
        assert_eq!(
            (v, reasons_field(&r).as_str()),
            (Verdict::Review, "synchrony")
        );
        let strict = VerdictPolicy {
            review_curve_only: true,
            ..pol
        };
        let (v, r) = decide(&pred(0.95, false, Head::CurveOnly), &none, &strict);
        assert_eq!((v, r), (Verdict::Review, vec![Reason::CurveOnly]));
    }

    #[test]
    fn codes_round_trip_and_are_unique() {
        for r in Reason::ALL {
            assert_eq!(Reason::from_code(r.code()), Some(r));
            assert!(!r.explain().is_empty());
            assert!(!r.code().contains(';'));
        }
    }
}
