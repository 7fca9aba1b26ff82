//! Neighbours, cross-map estimates and simplex forecasts against an independent numpy/scipy
//! implementation (tests/reference/crossmap_reference.py, numpy 2.1.3, scipy 1.14.1 cKDTree and
//! pearsonr), with the library fixed explicitly so no random generator is involved.

use approx::assert_abs_diff_eq;
use crossmap_engine::neighbours::{ExactScan, Library, NeighbourIndex, SortedLists};
use crossmap_engine::{Manifold, cross_map_with_library, simplex_forecast};
use serde_json::Value;

const FIXTURE: &str = include_str!(concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/../../tests/reference/fixtures/crossmap_reference.json"
));

fn series(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap_or(f64::NAN))
        .collect()
}

fn usizes(v: &Value) -> Vec<usize> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_u64().unwrap() as usize)
        .collect()
}

fn assert_series_eq(ours: &[f64], reference: &[f64], what: &str) {
    assert_eq!(ours.len(), reference.len(), "{what}: length");
    for (t, (a, b)) in ours.iter().zip(reference).enumerate() {
        if b.is_nan() {
            assert!(a.is_nan(), "{what}: t={t} expected missing, got {a}");
        } else {
            assert_abs_diff_eq!(*a, *b, epsilon = 1e-10);
        }
    }
}

#[test]
fn neighbour_times_and_distances_match_ckdtree() {
    let f: Value = serde_json::from_str(FIXTURE).unwrap();
    let y = series(&f["response"]);
    for case in f["cases"].as_array().unwrap() {
        let (e, tau, w) = (
            case["e"].as_u64().unwrap() as usize,
            case["tau"].as_u64().unwrap() as usize,
            case["theiler"].as_u64().unwrap() as usize,
        );
        let m = Manifold::new(&y, e, tau).unwrap();
        let lib_pos: Vec<u32> = usizes(&case["library_times"])
            .iter()
            .map(|&t| m.position(t).unwrap() as u32)
            .collect();
        let lib = Library::from_positions(lib_pos, m.len());
        let scan = ExactScan::new(&m, w);
        let lists = SortedLists::new(&m, w, 8);
        for q in case["queries"].as_array().unwrap() {
            let qp = m.position(q["time"].as_u64().unwrap() as usize).unwrap();
            let want_t = usizes(&q["neighbour_times"]);
            let want_d = series(&q["distances"]);
            for index in [&scan as &dyn NeighbourIndex, &lists] {
                let mut out = Vec::new();
                index.nearest(qp, &lib, e + 1, &|_| true, &mut out);
                let got_t: Vec<usize> = out.iter().map(|n| m.time(n.pos as usize)).collect();
                assert_eq!(got_t, want_t);
                for (n, d) in out.iter().zip(&want_d) {
                    assert_abs_diff_eq!(n.dist, *d, epsilon = 1e-12);
                }
            }
        }
    }
}

#[test]
fn cross_map_estimates_and_skills_match_reference() {
    let f: Value = serde_json::from_str(FIXTURE).unwrap();
    let (y, x) = (series(&f["response"]), series(&f["driver"]));
    for case in f["cases"].as_array().unwrap() {
        let (e, tau, w) = (
            case["e"].as_u64().unwrap() as usize,
            case["tau"].as_u64().unwrap() as usize,
            case["theiler"].as_u64().unwrap() as usize,
        );
        let lib = usizes(&case["library_times"]);
        for cm in case["cross_maps"].as_array().unwrap() {
            let lag = cm["lag"].as_i64().unwrap() as i32;
            let r = cross_map_with_library(&y, &x, e, tau, w, &lib, lag).unwrap();
            assert_series_eq(
                &r.estimates,
                &series(&cm["estimates"]),
                &format!("E={e} tau={tau} lag={lag}"),
            );
            assert_eq!(r.predicted, cm["predicted"].as_u64().unwrap() as usize);
            assert_abs_diff_eq!(r.skill, cm["skill"].as_f64().unwrap(), epsilon = 1e-10);
        }
    }
}

#[test]
fn simplex_forecasts_match_reference() {
    let f: Value = serde_json::from_str(FIXTURE).unwrap();
    let x = series(&f["simplex_series"]);
    for s in f["simplex"].as_array().unwrap() {
        let g = |k: &str| s[k].as_u64().unwrap() as usize;
        let r = simplex_forecast(&x, g("e"), g("tau"), g("horizon"), g("theiler")).unwrap();
        assert_series_eq(&r.predictions, &series(&s["predictions"]), "simplex");
        assert_eq!(r.predicted, g("predicted"));
        assert_abs_diff_eq!(r.skill, s["skill"].as_f64().unwrap(), epsilon = 1e-10);
    }
}
