//! The order in which pairs are presented: review, then causal, then non-causal.

use std::cmp::Ordering;

use crate::model::{PairView, VerdictKind};

/// Rank of a verdict group on the page; lower comes first.
pub(crate) fn group_rank(v: VerdictKind) -> u8 {
    match v {
        VerdictKind::Review => 0,
        VerdictKind::Causal => 1,
        VerdictKind::NonCausal => 2,
    }
}

/// Indices of `pairs` in display order.
///
/// Within review, the pairs closest to an even chance come first (the least settled);
/// within causal, the most probable first; within non-causal, the most probable first
/// too, so near misses are seen before clear negatives. Names then break ties, so the
/// order never depends on the input order.
pub(crate) fn display_order(pairs: &[PairView]) -> Vec<usize> {
    let mut idx: Vec<usize> = (0..pairs.len()).collect();
    idx.sort_by(|&a, &b| {
        let (pa, pb) = (&pairs[a], &pairs[b]);
        group_rank(pa.verdict)
            .cmp(&group_rank(pb.verdict))
            .then_with(|| within_group(pa, pb))
            .then_with(|| pa.driver.cmp(&pb.driver))
            .then_with(|| pa.response.cmp(&pb.response))
            .then_with(|| a.cmp(&b))
    });
    idx
}

fn within_group(a: &PairView, b: &PairView) -> Ordering {
    match a.verdict {
        VerdictKind::Review => (a.p_causal - 0.5)
            .abs()
            .total_cmp(&(b.p_causal - 0.5).abs()),
        VerdictKind::Causal | VerdictKind::NonCausal => b.p_causal.total_cmp(&a.p_causal),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn p(d: &str, v: VerdictKind, prob: f64) -> PairView {
        PairView {
            driver: d.into(),
            response: "r".into(),
            p_causal: prob,
            verdict: v,
            reasons: vec![],
            library_sizes: vec![],
            forward: vec![],
            reverse: None,
            reverse_library_sizes: None,
            decision: None,
            lag_profile: None,
            surrogate_skills: None,
            seasonal_surrogate_skills: None,
            key_features: vec![],
            answer_key: None,
        }
    }

    #[test]
    fn groups_then_probability_then_names() {
        use VerdictKind::*;
        let pairs = vec![
            p("a", NonCausal, 0.1),
            p("b", Causal, 0.8),
            p("c", Review, 0.7),
            p("d", Review, 0.45),
            p("e", Causal, 0.95),
            p("f", NonCausal, 0.3),
            p("g", Review, 0.55),
        ];
        let order: Vec<&str> = display_order(&pairs)
            .into_iter()
            .map(|i| pairs[i].driver.as_str())
            .collect();
        // d and g are equally close to 0.5, so the name decides.
        assert_eq!(order, ["d", "g", "c", "e", "b", "f", "a"]);
    }
}
