//! Canonical coupled systems of the cross-mapping literature, each in its published form.
//!
//! Unlike the family systems (one copy of a family's dynamics per unit, wired by a structure),
//! each form here is one small system written out as the papers give it, with its own
//! parameter ranges and its own answer key. They serve as a validation suite of published
//! systems and, at other seeds, as the small 2-4-variable systems that users most often bring.
//! Parameter values recalled rather than read from the papers are marked "(from memory)".

use serde::{Deserialize, Serialize};

use crate::graph::{Label, TruthRow};
use crate::run::{Reject, mean_sd, observe_series};
use crate::seeds::{Draw, splitmix64, system_seed};
use crate::spec::Spec;

/// A canonical system form.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum Form {
    /// Two-species coupled logistic maps, one-way, two-way or uncoupled (Sugihara et al. 2012).
    LogisticPair,
    /// Two Hénon maps, the first driving the second (Schiff et al. 1996 form).
    HenonPair,
    /// A Rössler flow driving a Lorenz flow through `C x2^2` (the form of Krakovská et al. 2018).
    RosslerLorenz,
    /// Three logistic species in a chain x -> y -> z, the middle observed or hidden.
    LogisticChain,
    /// Two Ricker populations forced by one hidden environment (the Moran 1953 effect), or by
    /// two unrelated ones; the environment is sometimes observed.
    MoranPair,
    /// Two seasonal epidemics (TSIR form of Finkenstädt & Grenfell 2000) sharing one season,
    /// sometimes linked by travel, or with unrelated seasons.
    SeasonalEpidemics,
    /// An observed seasonal environment (a noisy cycle, such as a temperature record) that
    /// forces a logistic or Ricker population through its growth rate (the design of Deyle et
    /// al. 2016), or sits beside an unforced one.
    ForcedPopulation,
}

impl Form {
    /// Every form, in the order of the spec's `[canonical]` weights.
    pub const ALL: [Form; 7] = [
        Form::LogisticPair,
        Form::HenonPair,
        Form::RosslerLorenz,
        Form::LogisticChain,
        Form::MoranPair,
        Form::SeasonalEpidemics,
        Form::ForcedPopulation,
    ];

    /// The form's name in spec keys; the family field of its systems is `canon_<name>`.
    pub fn as_str(self) -> &'static str {
        match self {
            Form::LogisticPair => "logistic_pair",
            Form::HenonPair => "henon_pair",
            Form::RosslerLorenz => "rossler_lorenz",
            Form::LogisticChain => "logistic_chain",
            Form::MoranPair => "moran_pair",
            Form::SeasonalEpidemics => "seasonal_epidemics",
            Form::ForcedPopulation => "forced_population",
        }
    }

    fn weight(self, spec: &Spec) -> f64 {
        let w = &spec.canonical;
        match self {
            Form::LogisticPair => w.logistic_pair,
            Form::HenonPair => w.henon_pair,
            Form::RosslerLorenz => w.rossler_lorenz,
            Form::LogisticChain => w.logistic_chain,
            Form::MoranPair => w.moran_pair,
            Form::SeasonalEpidemics => w.seasonal_epidemics,
            Form::ForcedPopulation => w.forced_population,
        }
    }
}

/// Every value drawn for one canonical system; enough to regenerate it alone.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CanonicalDraw {
    /// System id (`canon_<form>-<index>`).
    pub id: String,
    /// Position of the system in the spec's numbering.
    pub index: usize,
    /// Redraw attempt that produced a usable system.
    pub attempt: u32,
    /// The form.
    pub form: Form,
    /// The variant drawn (e.g. `one_way`, `two_way`, `uncoupled`, `shared`, `separate`).
    pub variant: String,
    /// Drawn parameters in the form's own order, named.
    pub params: Vec<(String, f64)>,
    /// Whether the optional variable of the form is observed (the chain's middle species,
    /// the Moran environment).
    pub extra_observed: bool,
    /// Recorded points.
    pub length: u64,
    /// Steps discarded first.
    pub transient: u64,
    /// Observation noise as a fraction of each series' SD.
    pub observation_noise: f64,
    /// Process noise level (used by the forms whose published version has one).
    pub process_noise: f64,
    /// Fraction of observed cells blanked.
    pub missing_fraction: f64,
    /// Seed of the noise and missing-cell streams.
    pub noise_seed: u64,
    /// An unrelated record observed beside the system (column `u`), if any.
    pub unrelated: Option<Unrelated>,
}

/// A record that has nothing to do with the system, observed beside it as column `u`, as lab
/// tables often hold one: independent of every other column both ways.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Unrelated {
    /// The x coordinate of its own Lorenz (1963) flow (sigma 10, rho 28, beta 8/3).
    Lorenz,
    /// AR(1) noise.
    Red,
    /// A noisy cycle of its own period, like a temperature record of another place.
    Cycle,
}

impl Unrelated {
    const ALL: [Unrelated; 3] = [Unrelated::Lorenz, Unrelated::Red, Unrelated::Cycle];

    /// The record, `n` points, from its own stream.
    fn series(self, n: usize, seed: u64) -> Vec<f64> {
        let mut d = Draw::new(splitmix64(seed ^ 0x14));
        match self {
            Unrelated::Lorenz => {
                let interval = d.uniform(0.03, 0.15);
                let steps = (interval / 0.005).ceil() as usize;
                let h = interval / steps as f64;
                let rhs = |s: [f64; 3]| {
                    [
                        10.0 * (s[1] - s[0]),
                        s[0] * (28.0 - s[2]) - s[1],
                        s[0] * s[1] - 8.0 / 3.0 * s[2],
                    ]
                };
                let add =
                    |a: [f64; 3], b: [f64; 3], k: f64| std::array::from_fn(|i| a[i] + k * b[i]);
                let mut s = [d.uniform(-5.0, 5.0), d.uniform(-5.0, 5.0), 25.0];
                let mut out = Vec::with_capacity(n);
                for k in 0..(n + 300) {
                    for _ in 0..steps {
                        let k1 = rhs(s);
                        let k2 = rhs(add(s, k1, h / 2.0));
                        let k3 = rhs(add(s, k2, h / 2.0));
                        let k4 = rhs(add(s, k3, h));
                        s = std::array::from_fn(|i| {
                            s[i] + h / 6.0 * (k1[i] + 2.0 * k2[i] + 2.0 * k3[i] + k4[i])
                        });
                    }
                    if k >= 300 {
                        out.push(s[0]);
                    }
                }
                out
            }
            Unrelated::Red => {
                let phi = d.uniform(0.0, 0.9);
                let mut v = 0.0;
                (0..n)
                    .map(|_| {
                        v = phi * v + d.normal();
                        v
                    })
                    .collect()
            }
            Unrelated::Cycle => {
                let (period, phase) = (d.uniform(5.0, 30.0), d.uniform(0.0, std::f64::consts::TAU));
                let sd = d.uniform(0.2, 1.0);
                (0..n)
                    .map(|t| {
                        (std::f64::consts::TAU * t as f64 / period + phase).sin() + sd * d.normal()
                    })
                    .collect()
            }
        }
    }
}

impl CanonicalDraw {
    fn p(&self, name: &str) -> f64 {
        self.params
            .iter()
            .find(|(k, _)| k == name)
            .map_or(f64::NAN, |(_, v)| *v)
    }
}

/// Draws canonical system `k` (0-based among the canonical systems) at `attempt`; `index` is
/// its position in the whole spec.
pub(crate) fn draw(spec: &Spec, index: usize, attempt: u32) -> CanonicalDraw {
    let mut d = Draw::new(system_seed(spec.seed ^ 0xCA70_0000, index, attempt));
    let weights: Vec<f64> = Form::ALL.iter().map(|f| f.weight(spec)).collect();
    let form = Form::ALL[d.weighted(&weights)];
    let s = &spec.sampling;
    let n = &spec.noise;
    let length = d.int(s.length.lo, s.length.hi);
    let transient = d.int(s.transient.lo, s.transient.hi).max(200);
    let clean = d.chance(n.clean_share);
    let observation_noise = d.uniform(n.observation.lo, n.observation.hi);
    let process_noise = d.uniform(n.process.lo, n.process.hi);
    let missing_fraction = d.uniform(s.missing.lo, s.missing.hi);
    let noise_seed = d.next_seed();
    let uncoupled = d.chance(spec.canonical.uncoupled_share);
    let mut params: Vec<(String, f64)> = Vec::new();
    let mut put = |k: &str, v: f64| params.push((k.to_string(), v));
    let mut extra_observed = false;
    let variant: &str = match form {
        Form::LogisticPair => {
            // rx 3.8, ry 3.5 in the paper's figures (from memory); couplings 0-0.3.
            put("rx", d.uniform(3.7, 3.9));
            put("ry", d.uniform(3.5, 3.8));
            // Coupled variants are 1 (x -> y), 2 (y -> x) and 3 (both ways), weighted 1 : 1 : 2.
            let v = if uncoupled {
                0
            } else {
                1 + d.weighted(&[1.0, 1.0, 2.0])
            };
            // Log-uniform couplings: weak links (such as the paper's 0.02) are as common as
            // strong ones.
            let mut beta = |lo: f64| (d.uniform(f64::ln(lo), f64::ln(0.3))).exp();
            let (bxy, byx, name) = match v {
                0 => (0.0, 0.0, "uncoupled"),
                // x drives y only.
                1 => (0.0, beta(0.02), "one_way_x_to_y"),
                // y drives x only.
                2 => (beta(0.02), 0.0, "one_way_y_to_x"),
                3 => (beta(0.01), beta(0.01), "two_way"),
                _ => unreachable!("weighted() returns an index into its three weights"),
            };
            put("beta_xy", bxy);
            put("beta_yx", byx);
            name
        }
        Form::HenonPair => {
            // Identical maps (a 1.4, b 0.3); complete synchronisation sets in near C = 0.7
            // (from memory), so C stays below it.
            put(
                "c",
                if uncoupled {
                    0.0
                } else {
                    d.uniform(0.05, 0.65)
                },
            );
            if uncoupled { "uncoupled" } else { "one_way" }
        }
        Form::RosslerLorenz => {
            // C from 0 to about 3 (from memory).
            put("c", if uncoupled { 0.0 } else { d.uniform(0.3, 3.0) });
            put("interval", d.uniform(0.04, 0.1));
            if uncoupled { "uncoupled" } else { "one_way" }
        }
        Form::LogisticChain => {
            for k in ["rx", "ry", "rz"] {
                put(k, d.uniform(3.6, 3.9));
            }
            put("beta_yx", d.uniform(0.05, 0.3));
            put("beta_zy", d.uniform(0.05, 0.3));
            extra_observed = d.chance(0.5);
            if extra_observed {
                "middle_observed"
            } else {
                "middle_hidden"
            }
        }
        Form::MoranPair => {
            // Density dependence from stable to chaotic; environmental SD on the log scale.
            put("r1", d.uniform(0.5, 2.8));
            put("r2", d.uniform(0.5, 2.8));
            put("sigma", d.uniform(0.05, 0.3));
            put("persistence", d.uniform(0.0, 0.8));
            extra_observed = !uncoupled && d.chance(0.3);
            if uncoupled { "separate" } else { "shared" }
        }
        Form::SeasonalEpidemics => {
            // Biweekly steps, 26 to the year; mean transmission near R0, mixing exponent 0.97
            // and seasonal amplitudes of a few tens of percent (from memory).
            put("beta1", d.uniform(15.0, 30.0));
            put("beta2", d.uniform(15.0, 30.0));
            put("amplitude1", d.uniform(0.1, 0.35));
            put("amplitude2", d.uniform(0.1, 0.35));
            put("phase", d.uniform(0.0, std::f64::consts::TAU));
            put("phase2", d.uniform(0.0, std::f64::consts::TAU));
            put("period2", d.uniform(0.75, 1.3) * 26.0);
            let travel = !uncoupled && d.chance(0.5);
            put("travel", if travel { d.uniform(0.005, 0.05) } else { 0.0 });
            if uncoupled {
                "separate"
            } else if travel {
                "shared_travel"
            } else {
                "shared"
            }
        }
        Form::ForcedPopulation => {
            // Period in steps (monthly to fortnightly records of an annual cycle), noise of the
            // environment relative to the cycle's amplitude.
            put("period", d.uniform(5.0, 26.0));
            put("phase", d.uniform(0.0, std::f64::consts::TAU));
            put("env_noise", d.uniform(0.1, 0.8));
            put("env_persistence", d.uniform(0.0, 0.7));
            let ricker = d.chance(0.5);
            put("ricker", f64::from(u8::from(ricker)));
            if ricker {
                put("r", d.uniform(1.5, 3.0));
                put(
                    "forcing",
                    if uncoupled { 0.0 } else { d.uniform(0.05, 0.5) },
                );
            } else {
                put("r", d.uniform(3.6, 3.85));
                put(
                    "forcing",
                    if uncoupled {
                        0.0
                    } else {
                        d.uniform(0.005, 0.03)
                    },
                );
            }
            if uncoupled { "unforced" } else { "forced" }
        }
    };
    let (observation_noise, process_noise, missing_fraction) = if clean {
        (0.0, 0.0, 0.0)
    } else {
        (observation_noise, process_noise, missing_fraction)
    };
    // Drawn last, so a spec without unrelated records draws every other value as before.
    let unrelated = d
        .chance(spec.canonical.unrelated_share)
        .then(|| Unrelated::ALL[d.int(0, Unrelated::ALL.len() as u64 - 1) as usize]);
    CanonicalDraw {
        id: format!("canon_{}-{:04}", form.as_str(), index),
        index,
        attempt,
        form,
        variant: variant.to_string(),
        params,
        extra_observed,
        length,
        transient,
        observation_noise,
        process_noise,
        missing_fraction,
        noise_seed,
        unrelated,
    }
}

/// Observed names, clean series and the answer key of a drawn canonical system.
pub(crate) struct Built {
    pub names: Vec<String>,
    pub series: Vec<Vec<f64>>,
    pub truth: Vec<TruthRow>,
}

fn truth_of(names: &[&str], label: impl Fn(&str, &str) -> Label) -> Vec<TruthRow> {
    let mut rows = Vec::new();
    for d in names {
        for r in names {
            if d != r {
                rows.push(TruthRow {
                    driver: d.to_string(),
                    response: r.to_string(),
                    label: label(d, r),
                });
            }
        }
    }
    rows
}

fn bounded(v: f64) -> Result<f64, Reject> {
    if v.is_finite() && v.abs() < 1e6 {
        Ok(v)
    } else {
        Err(Reject::BlowUp)
    }
}

/// Runs a map `step` for the transient and `length` recorded steps, keeping `observe(state)`.
fn iterate<const N: usize>(
    d: &CanonicalDraw,
    mut s: [f64; N],
    mut step: impl FnMut(usize, &[f64; N]) -> [f64; N],
    observe: impl Fn(&[f64; N]) -> Vec<f64>,
) -> Result<Vec<Vec<f64>>, Reject> {
    let total = (d.transient + d.length) as usize;
    let mut out: Vec<Vec<f64>> = Vec::new();
    for k in 0..total {
        s = step(k, &s);
        for v in &s {
            bounded(*v)?;
        }
        if k >= d.transient as usize {
            let o = observe(&s);
            if out.is_empty() {
                out = vec![Vec::with_capacity(d.length as usize); o.len()];
            }
            for (c, v) in out.iter_mut().zip(o) {
                c.push(v);
            }
        }
    }
    Ok(out)
}

/// Sugihara et al. 2012 form: `x' = x (r - r x - b y)`; a state leaving (0, 1) is a blow-up.
fn logistic(x: f64, r: f64, input: f64) -> Result<f64, Reject> {
    let v = x * (r - r * x - input);
    if v > 0.0 && v < 1.0 {
        Ok(v)
    } else {
        Err(Reject::BlowUp)
    }
}

fn simulate_clean(d: &CanonicalDraw, init: &mut Draw) -> Result<Built, Reject> {
    let causal = |yes: bool| {
        if yes {
            Label::Direct
        } else {
            Label::Independent
        }
    };
    match d.form {
        Form::ForcedPopulation => forced_population(d, init),
        Form::LogisticPair => {
            let (rx, ry, bxy, byx) = (d.p("rx"), d.p("ry"), d.p("beta_xy"), d.p("beta_yx"));
            let mut err = None;
            let series = iterate(
                d,
                [init.uniform(0.2, 0.8), init.uniform(0.2, 0.8)],
                |_, s| match (
                    logistic(s[0], rx, bxy * s[1]),
                    logistic(s[1], ry, byx * s[0]),
                ) {
                    (Ok(a), Ok(b)) => [a, b],
                    _ => {
                        err = Some(Reject::BlowUp);
                        [f64::NAN, f64::NAN]
                    }
                },
                |s| s.to_vec(),
            );
            if let Some(e) = err {
                return Err(e);
            }
            Ok(Built {
                names: vec!["x".into(), "y".into()],
                series: series?,
                truth: truth_of(&["x", "y"], |a, _| {
                    causal(if a == "x" { byx > 0.0 } else { bxy > 0.0 })
                }),
            })
        }
        Form::HenonPair => {
            let c = d.p("c");
            let series = iterate(
                d,
                [
                    init.uniform(-0.1, 0.1),
                    init.uniform(-0.1, 0.1),
                    init.uniform(-0.1, 0.1),
                    init.uniform(-0.1, 0.1),
                ],
                |_, s| {
                    let [x1, x2, y1, y2] = *s;
                    [
                        1.4 - x1 * x1 + 0.3 * x2,
                        x1,
                        1.4 - (c * x1 + (1.0 - c) * y1) * y1 + 0.3 * y2,
                        y1,
                    ]
                },
                |s| vec![s[0], s[2]],
            )?;
            Ok(Built {
                names: vec!["x".into(), "y".into()],
                series,
                truth: truth_of(&["x", "y"], |a, _| causal(a == "x" && c > 0.0)),
            })
        }
        Form::RosslerLorenz => {
            let (c, interval) = (d.p("c"), d.p("interval"));
            let substeps = (interval / 0.005).ceil() as usize;
            let h = interval / substeps as f64;
            let rhs = |s: &[f64; 6]| -> [f64; 6] {
                let [x1, x2, x3, y1, y2, y3] = *s;
                [
                    -6.0 * (x2 + x3),
                    6.0 * (x1 + 0.2 * x2),
                    6.0 * (0.2 + x3 * (x1 - 5.7)),
                    10.0 * (y2 - y1),
                    28.0 * y1 - y2 - y1 * y3 + c * x2 * x2,
                    y1 * y2 - 8.0 / 3.0 * y3,
                ]
            };
            let add = |a: &[f64; 6], b: &[f64; 6], k: f64| -> [f64; 6] {
                std::array::from_fn(|i| a[i] + k * b[i])
            };
            let series = iterate(
                d,
                [
                    init.uniform(-1.0, 1.0),
                    init.uniform(-1.0, 1.0),
                    0.1,
                    init.uniform(-1.0, 1.0),
                    init.uniform(-1.0, 1.0),
                    20.0,
                ],
                |_, s| {
                    let mut s = *s;
                    for _ in 0..substeps {
                        let k1 = rhs(&s);
                        let k2 = rhs(&add(&s, &k1, h / 2.0));
                        let k3 = rhs(&add(&s, &k2, h / 2.0));
                        let k4 = rhs(&add(&s, &k3, h));
                        s = std::array::from_fn(|i| {
                            s[i] + h / 6.0 * (k1[i] + 2.0 * k2[i] + 2.0 * k3[i] + k4[i])
                        });
                    }
                    s
                },
                |s| vec![s[1], s[4]],
            )?;
            Ok(Built {
                names: vec!["x".into(), "y".into()],
                series,
                truth: truth_of(&["x", "y"], |a, _| causal(a == "x" && c > 0.0)),
            })
        }
        Form::LogisticChain => {
            let (rx, ry, rz) = (d.p("rx"), d.p("ry"), d.p("rz"));
            let (byx, bzy) = (d.p("beta_yx"), d.p("beta_zy"));
            let mut bad = false;
            let series = iterate(
                d,
                [
                    init.uniform(0.2, 0.8),
                    init.uniform(0.2, 0.8),
                    init.uniform(0.2, 0.8),
                ],
                |_, s| {
                    let next = [
                        logistic(s[0], rx, 0.0),
                        logistic(s[1], ry, byx * s[0]),
                        logistic(s[2], rz, bzy * s[1]),
                    ];
                    if next.iter().any(Result::is_err) {
                        bad = true;
                        return [f64::NAN; 3];
                    }
                    next.map(|v| v.unwrap_or(f64::NAN))
                },
                |s| s.to_vec(),
            );
            if bad {
                return Err(Reject::BlowUp);
            }
            let mut series = series?;
            let names: &[&str] = if d.extra_observed {
                &["x", "y", "z"]
            } else {
                series.remove(1);
                &["x", "z"]
            };
            Ok(Built {
                names: names.iter().map(|s| s.to_string()).collect(),
                series,
                truth: truth_of(names, |a, b| match (a, b) {
                    ("x", "y") | ("y", "z") => Label::Direct,
                    ("x", "z") => Label::Indirect,
                    _ => Label::Independent,
                }),
            })
        }
        Form::MoranPair => {
            let (r1, r2) = (d.p("r1"), d.p("r2"));
            let (sigma, phi) = (d.p("sigma"), d.p("persistence"));
            let shared = d.variant == "shared";
            let mut env = Draw::new(splitmix64(d.noise_seed ^ 0x11));
            let innov = (1.0 - phi * phi).sqrt();
            let series = iterate(
                d,
                [init.uniform(0.5, 1.5), init.uniform(0.5, 1.5), 0.0, 0.0],
                |_, s| {
                    let e1 = phi * s[2] + innov * env.normal();
                    let e2 = if shared {
                        e1
                    } else {
                        phi * s[3] + innov * env.normal()
                    };
                    [
                        s[0] * (r1 * (1.0 - s[0]) + sigma * e1).exp(),
                        s[1] * (r2 * (1.0 - s[1]) + sigma * e2).exp(),
                        e1,
                        e2,
                    ]
                },
                |s| vec![s[0], s[1], s[2]],
            )?;
            let mut series = series;
            let names: &[&str] = if d.extra_observed {
                &["n1", "n2", "env"]
            } else {
                series.truncate(2);
                &["n1", "n2"]
            };
            Ok(Built {
                names: names.iter().map(|s| s.to_string()).collect(),
                series,
                truth: truth_of(names, |a, b| match (a, b) {
                    ("env", _) => Label::Direct,
                    (_, "env") => Label::Independent,
                    _ if shared => Label::Confounded,
                    _ => Label::Independent,
                }),
            })
        }
        Form::SeasonalEpidemics => {
            let (b1, b2) = (d.p("beta1"), d.p("beta2"));
            let (a1, a2) = (d.p("amplitude1"), d.p("amplitude2"));
            let (ph, travel) = (d.p("phase"), d.p("travel"));
            let separate = d.variant == "separate";
            let (ph2, period2) = if separate {
                (d.p("phase2"), d.p("period2"))
            } else {
                (ph, 26.0)
            };
            // Population 1e6, 2 % births a year, alpha 0.97, a trickle of imported cases.
            let (pop, births, alpha, imports) = (1e6, 1e6 * 0.02 / 26.0, 0.97, 1.0);
            let sigma = d.process_noise.min(0.2);
            let mut noise = Draw::new(splitmix64(d.noise_seed ^ 0x12));
            let season = |t: usize, period: f64, phase: f64| {
                (std::f64::consts::TAU * t as f64 / period + phase).cos()
            };
            let series = iterate(
                d,
                [
                    pop / b1 * init.uniform(0.9, 1.1),
                    init.uniform(100.0, 1000.0),
                    pop / b2 * init.uniform(0.9, 1.1),
                    init.uniform(100.0, 1000.0),
                ],
                |t, s| {
                    let [s1, i1, s2, i2] = *s;
                    let beta1 = b1 * (1.0 + a1 * season(t, 26.0, ph));
                    let beta2 = b2 * (1.0 + a2 * season(t, period2, ph2));
                    let z1 = (sigma * noise.normal()).exp();
                    let z2 = (sigma * noise.normal()).exp();
                    let n1 = (beta1 * s1 * (i1 + imports).powf(alpha) / pop * z1).min(s1);
                    let n2 =
                        (beta2 * s2 * (i2 + travel * i1 + imports).powf(alpha) / pop * z2).min(s2);
                    [s1 + births - n1, n1, s2 + births - n2, n2]
                },
                |s| vec![s[1], s[3]],
            )?;
            Ok(Built {
                names: vec!["cases1".into(), "cases2".into()],
                series,
                truth: truth_of(&["cases1", "cases2"], |a, _| {
                    if a == "cases1" && travel > 0.0 {
                        Label::Direct
                    } else if separate {
                        Label::Independent
                    } else {
                        Label::Confounded
                    }
                }),
            })
        }
    }
}

/// The forced-population form: environment `env` and population `n`.
fn forced_population(d: &CanonicalDraw, init: &mut Draw) -> Result<Built, Reject> {
    let (period, phase) = (d.p("period"), d.p("phase"));
    let (sd, phi) = (d.p("env_noise"), d.p("env_persistence"));
    let (ricker, r, a) = (d.p("ricker") > 0.5, d.p("r"), d.p("forcing"));
    let mut noise = Draw::new(splitmix64(d.noise_seed ^ 0x13));
    let innov = (1.0 - phi * phi).sqrt();
    let series = iterate(
        d,
        [0.0, 0.0, init.uniform(0.2, 0.8)],
        |t, s| {
            let ar = phi * s[1] + innov * noise.normal();
            let env = (std::f64::consts::TAU * t as f64 / period + phase).sin() + sd * ar;
            let n = s[2];
            let next = if ricker {
                n * (r * (1.0 - n) + a * env).exp()
            } else {
                let rt = (r * (1.0 + a * env)).min(4.0);
                (n * rt * (1.0 - n)).clamp(1e-9, 1.0 - 1e-9)
            };
            [env, ar, next]
        },
        |s| vec![s[0], s[2]],
    )?;
    Ok(Built {
        names: vec!["env".into(), "n".into()],
        series,
        truth: truth_of(&["env", "n"], |a_, _| {
            if a_ == "env" && a > 0.0 {
                Label::Direct
            } else {
                Label::Independent
            }
        }),
    })
}

/// Runs a drawn canonical system: clean series, then observation noise and missing cells.
pub(crate) fn build(d: &CanonicalDraw) -> Result<Built, Reject> {
    let mut init = Draw::new(splitmix64(d.noise_seed ^ 0x10));
    let mut built = simulate_clean(d, &mut init)?;
    if let Some(u) = d.unrelated {
        for v in &built.names {
            for (a, b) in [(v.clone(), "u".to_string()), ("u".to_string(), v.clone())] {
                built.truth.push(TruthRow {
                    driver: a,
                    response: b,
                    label: Label::Independent,
                });
            }
        }
        built.names.push("u".into());
        built.series.push(u.series(d.length as usize, d.noise_seed));
    }
    for col in &built.series {
        let (mean, sd) = mean_sd(col);
        if sd <= 1e-8 * mean.abs().max(1e-3) {
            return Err(Reject::Flat);
        }
    }
    built.series = observe_series(
        built.series,
        d.observation_noise,
        d.missing_fraction,
        d.noise_seed,
    );
    Ok(built)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec(text: &str) -> crate::ValidSpec {
        Spec::from_toml_str(text).unwrap()
    }

    #[test]
    fn every_form_simulates_with_its_answer_key() {
        let mut text = String::from(
            "seed = 5\n[sampling]\nlength = 300\n[noise]\nobservation = 0\nprocess = 0\n\
             [canonical]\ncount = 80\nuncoupled_share = 0.2\n",
        );
        text.push_str("[families.logistic]\ncount = 0\n");
        let s = spec(&text);
        let systems = crate::simulate(&s).unwrap();
        assert_eq!(systems.len(), 80);
        let mut forms = std::collections::HashSet::new();
        for sys in &systems {
            forms.insert(sys.family.clone());
            assert!(sys.family.starts_with("canon_"), "{}", sys.family);
            let n = sys.variables.len();
            assert_eq!(sys.truth.len(), n * (n - 1));
            for col in &sys.series {
                assert_eq!(col.len(), 300);
                assert!(col.iter().all(|v| v.is_finite()), "{}", sys.id);
            }
        }
        assert_eq!(forms.len(), Form::ALL.len());
    }

    #[test]
    fn logistic_pairs_come_in_every_variant_with_matching_truth() {
        // Regression: the two-way variant (each species acting on the other, the form of
        // Sugihara et al. 2012 with beta_xy 0.02, beta_yx 0.1) was never drawn, and the
        // uncoupled one came twice as often as asked.
        let s = spec(
            "seed = 5\n[sampling]\nlength = 100\n[canonical]\ncount = 200\nuncoupled_share = 0\nhenon_pair = 0\nrossler_lorenz = 0\nlogistic_chain = 0\nmoran_pair = 0\nseasonal_epidemics = 0\nforced_population = 0\n",
        );
        let mut seen = std::collections::BTreeMap::<String, usize>::new();
        for sys in crate::simulate(&s).unwrap() {
            *seen.entry(sys.structure.clone()).or_default() += 1;
            let direct = |d: &str| {
                sys.truth
                    .iter()
                    .find(|t| t.driver == d)
                    .is_some_and(|t| t.label == Label::Direct)
            };
            let want = match sys.structure.as_str() {
                "one_way_x_to_y" => (true, false),
                "one_way_y_to_x" => (false, true),
                "two_way" => (true, true),
                other => panic!("{}: variant {other} with uncoupled_share 0", sys.id),
            };
            assert_eq!((direct("x"), direct("y")), want, "{}", sys.id);
        }
        // Weights 1 : 1 : 2, so two-way is about half of 200 (binomial sd about 7).
        let two_way = seen.get("two_way").copied().unwrap_or(0);
        assert!((70..=130).contains(&two_way), "{seen:?}");
        assert!(seen.len() == 3, "{seen:?}");
    }

    #[test]
    fn henon_drive_is_one_way() {
        // Schiff et al. 1996 form: x enters y's map, never the reverse.
        let s = spec(
            "seed = 9\n[canonical]\ncount = 40\nlogistic_pair = 0\nrossler_lorenz = 0\nlogistic_chain = 0\nmoran_pair = 0\nseasonal_epidemics = 0\nforced_population = 0\n",
        );
        for sys in crate::simulate(&s).unwrap() {
            let coupled = sys.structure != "uncoupled";
            for t in &sys.truth {
                let want = if coupled && t.driver == "x" {
                    Label::Direct
                } else {
                    Label::Independent
                };
                assert_eq!(t.label, want, "{} {}->{}", sys.id, t.driver, t.response);
            }
        }
    }

    #[test]
    fn uncoupled_henon_maps_are_identical_in_law_but_unrelated() {
        // Two uncoupled Hénon maps from different starts decorrelate (Lyapunov exponent
        // about 0.42, Sprott 2003), so their plain correlation is near zero.
        let s = spec(
            "seed = 3\n[sampling]\nlength = 2000\n[noise]\nobservation = 0\n[canonical]\ncount = 6\nuncoupled_share = 1\nlogistic_pair = 0\nrossler_lorenz = 0\nlogistic_chain = 0\nmoran_pair = 0\nseasonal_epidemics = 0\nforced_population = 0\n",
        );
        for sys in crate::simulate(&s).unwrap() {
            let (x, y) = (&sys.series[0], &sys.series[1]);
            let (mx, sx) = mean_sd(x);
            let (my, sy) = mean_sd(y);
            let r: f64 = x
                .iter()
                .zip(y)
                .map(|(a, b)| (a - mx) * (b - my))
                .sum::<f64>()
                / (x.len() as f64 * sx * sy);
            assert!(r.abs() < 0.1, "{} r = {r}", sys.id);
        }
    }

    #[test]
    fn an_unrelated_record_is_independent_both_ways() {
        let s = spec(
            "seed = 4\n[sampling]\nlength = 200\n[canonical]\ncount = 12\nunrelated_share = 1\n",
        );
        for sys in crate::simulate(&s).unwrap() {
            assert_eq!(sys.variables.last().map(String::as_str), Some("u"));
            let n = sys.variables.len();
            assert_eq!(sys.truth.len(), n * (n - 1));
            for t in sys
                .truth
                .iter()
                .filter(|t| t.driver == "u" || t.response == "u")
            {
                assert_eq!(t.label, Label::Independent);
            }
        }
    }

    #[test]
    fn regenerates_alone() {
        let s = spec("seed = 2\n[sampling]\nlength = 100\n[canonical]\ncount = 12\n");
        let all = crate::simulate(&s).unwrap();
        for (k, sys) in all.iter().enumerate() {
            assert_eq!(&crate::simulate_one(&s, k).unwrap(), sys);
            assert_eq!(&crate::System::regenerate(&sys.drawn).unwrap(), sys);
        }
    }
}
