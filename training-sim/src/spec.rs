//! The TOML spec: what to simulate, parsed once and checked before any work.

use serde::{Deserialize, Serialize};

/// Shortest series a spec may ask for: delay embedding plus cross mapping at a few
/// library sizes needs a few tens of points (common practice).
pub const MIN_LENGTH: u64 = 30;

/// Longest series a spec may ask for (keeps a typo from exhausting memory).
pub const MAX_LENGTH: u64 = 1_000_000;

/// Errors found while reading or checking a spec.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SpecError {
    /// The text is not valid TOML, has an unknown key or a value of the wrong type.
    #[error("spec is not valid: {0}")]
    Parse(#[from] toml::de::Error),
    /// A range has its lower end above its upper end.
    #[error("`{key}` is the empty range [{lo}, {hi}]: write the smaller value first")]
    InvertedRange {
        /// Dotted key of the range.
        key: String,
        /// Lower end as written.
        lo: f64,
        /// Upper end as written.
        hi: f64,
    },
    /// A value is NaN or infinite.
    #[error("`{key}` is not a finite number")]
    NonFinite {
        /// Dotted key of the value.
        key: String,
    },
    /// A noise level is below zero.
    #[error("`{key}` allows negative noise ({value}); noise levels must be 0 or more")]
    NegativeNoise {
        /// Dotted key of the noise range.
        key: String,
        /// The offending value.
        value: f64,
    },
    /// The series length is shorter than embedding and cross mapping need.
    #[error("`sampling.length` allows {value} points; at least {min} are needed for embedding")]
    TooShort {
        /// The shortest length allowed.
        min: u64,
        /// The offending value.
        value: u64,
    },
    /// A value lies outside the interval the model accepts.
    #[error("`{key}` = {value} is outside the allowed interval {allowed}")]
    OutOfRange {
        /// Dotted key of the value.
        key: String,
        /// The offending value.
        value: f64,
        /// The allowed interval, in words.
        allowed: &'static str,
    },
    /// Every family count is zero.
    #[error("every family count is zero: set `count` under at least one `[families.NAME]` table")]
    NoSystems,
    /// Every structure weight is zero.
    #[error(
        "every weight under `[structures]` is zero: give at least one structure a positive weight"
    )]
    NoStructures,
}

/// A closed interval `[lo, hi]` of real values; written `[lo, hi]` or as one number.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(try_from = "RangeRepr", into = "[f64; 2]")]
pub struct Range {
    /// Lower end.
    pub lo: f64,
    /// Upper end.
    pub hi: f64,
}

impl Range {
    /// The interval `[lo, hi]`.
    pub const fn new(lo: f64, hi: f64) -> Self {
        Self { lo, hi }
    }
}

impl From<Range> for [f64; 2] {
    fn from(r: Range) -> Self {
        [r.lo, r.hi]
    }
}

#[derive(Deserialize)]
#[serde(untagged)]
enum RangeRepr {
    One(f64),
    Two([f64; 2]),
}

impl From<RangeRepr> for Range {
    fn from(r: RangeRepr) -> Self {
        match r {
            RangeRepr::One(v) => Range::new(v, v),
            RangeRepr::Two([lo, hi]) => Range::new(lo, hi),
        }
    }
}

/// A closed interval of whole numbers; written `[lo, hi]` or as one number.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(from = "IntRangeRepr", into = "[u64; 2]")]
pub struct IntRange {
    /// Lower end.
    pub lo: u64,
    /// Upper end.
    pub hi: u64,
}

impl IntRange {
    /// The interval `[lo, hi]`.
    pub const fn new(lo: u64, hi: u64) -> Self {
        Self { lo, hi }
    }
}

impl From<IntRange> for [u64; 2] {
    fn from(r: IntRange) -> Self {
        [r.lo, r.hi]
    }
}

#[derive(Deserialize)]
#[serde(untagged)]
enum IntRangeRepr {
    One(u64),
    Two([u64; 2]),
}

impl From<IntRangeRepr> for IntRange {
    fn from(r: IntRangeRepr) -> Self {
        match r {
            IntRangeRepr::One(v) => IntRange::new(v, v),
            IntRangeRepr::Two([lo, hi]) => IntRange::new(lo, hi),
        }
    }
}

/// Declares a spec table: a struct whose missing keys take the given defaults and whose
/// unknown keys are an error.
macro_rules! spec_table {
    ($(#[$m:meta])* $name:ident { $( $(#[$fm:meta])* $field:ident : $ty:ty = $def:expr ),* $(,)? }) => {
        $(#[$m])*
        #[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
        #[serde(deny_unknown_fields, default)]
        pub struct $name { $( $(#[$fm])* pub $field: $ty, )* }
        impl Default for $name {
            fn default() -> Self { Self { $( $field: $def, )* } }
        }
    };
}

/// Most observed units a network system may have.
pub const MAX_NETWORK_UNITS: u64 = 16;

spec_table! {
    /// `[sampling]`: how long each record is and how it is taken.
    SamplingSpec {
        /// Recorded points per series.
        length: IntRange = IntRange::new(150, 600),
        /// Keep every k-th sampling step.
        thinning: IntRange = IntRange::new(1, 1),
        /// Sampling steps discarded before recording starts.
        transient: IntRange = IntRange::new(300, 600),
        /// Fraction of observed cells blanked out (missing values).
        missing: Range = Range::new(0.0, 0.0),
    }
}

spec_table! {
    /// `[noise]`: observation and process noise levels.
    NoiseSpec {
        /// Observation noise, as a fraction of each clean series' standard deviation.
        observation: Range = Range::new(0.0, 0.3),
        /// Process noise: size of the random kick given to every state variable at every
        /// sampling step (log scale for populations, state scale otherwise).
        process: Range = Range::new(0.0, 0.02),
        /// Share of systems recorded clean: no observation or process noise and no missing
        /// cells, as published model systems usually are.
        clean_share: f64 = 0.0,
    }
}

spec_table! {
    /// `[network]`: size and wiring density of the `network` structure.
    NetworkSpec {
        /// Observed units of a network system.
        units: IntRange = IntRange::new(3, 5),
        /// Chance that each ordered pair of units is linked.
        link_probability: Range = Range::new(0.3, 0.3),
    }
}

spec_table! {
    /// `[structures]`: relative weights of the causal structures.
    StructureWeights {
        /// A drives B.
        one_way: f64 = 3.0,
        /// A and B drive each other.
        two_way: f64 = 1.5,
        /// A drives B strongly enough to synchronise it.
        synchrony: f64 = 1.0,
        /// A -> B -> C, all observed.
        chain_observed: f64 = 1.0,
        /// A -> B -> C, B hidden.
        chain_hidden: f64 = 1.0,
        /// A -> B -> C -> D, with B, C or neither hidden.
        chain3: f64 = 1.0,
        /// A hidden unit drives two uncoupled observed units.
        hidden_driver: f64 = 1.5,
        /// One hidden seasonal forcing drives two uncoupled units.
        shared_seasonality: f64 = 1.0,
        /// One hidden environmental noise drives two uncoupled units.
        shared_noise: f64 = 1.0,
        /// Two unrelated units.
        independent: f64 = 2.0,
        /// Two unrelated units, each with its own seasonal forcing of nearly equal period.
        similar_periods: f64 = 1.0,
        /// Three to five units with random couplings, sometimes a hidden unit or shared forcing.
        network: f64 = 1.5,
    }
}

spec_table! {
    /// `[canonical]`: systems in the published forms of the cross-mapping literature, numbered
    /// after every family system; the weights say how often each form is drawn.
    CanonicalSpec {
        /// Canonical systems to draw.
        count: u64 = 0,
        /// Share of canonical systems drawn without their coupling (or, for the shared-driver
        /// forms, with unrelated drivers).
        uncoupled_share: f64 = 0.25,
        /// Share of canonical systems observed with an unrelated record beside them.
        unrelated_share: f64 = 0.0,
        /// Two-species coupled logistic maps (Sugihara et al. 2012).
        logistic_pair: f64 = 1.0,
        /// Two Hénon maps, one driving the other (Schiff et al. 1996).
        henon_pair: f64 = 1.0,
        /// A Rössler flow driving a Lorenz flow.
        rossler_lorenz: f64 = 1.0,
        /// A three-species logistic chain, middle observed or hidden.
        logistic_chain: f64 = 1.0,
        /// Two populations under one hidden environment (Moran 1953).
        moran_pair: f64 = 1.0,
        /// Two seasonal epidemics sharing a season (Finkenstädt & Grenfell 2000).
        seasonal_epidemics: f64 = 1.0,
        /// An observed seasonal environment forcing a population, or beside an unforced one.
        forced_population: f64 = 1.0,
    }
}

spec_table! {
    /// `[families.logistic]`: coupled logistic maps (Sugihara et al. 2012 form).
    LogisticSpec {
        /// Systems of this family.
        count: u64 = 0,
        /// Growth rate r.
        r: Range = Range::new(3.6, 3.9),
        /// Coupling strength b for ordinary links.
        coupling: Range = Range::new(0.02, 0.3),
        /// Coupling strength for the synchrony structure.
        strong_coupling: Range = Range::new(0.5, 1.0),
        /// Relative amplitude of forcing on r.
        forcing: Range = Range::new(0.01, 0.04),
        /// Period (iterations) of seasonal forcing.
        seasonal_period: Range = Range::new(8.0, 16.0),
    }
}

spec_table! {
    /// `[families.ricker]`: Ricker population maps with competitive coupling.
    RickerSpec {
        /// Systems of this family.
        count: u64 = 0,
        /// Growth rate r.
        r: Range = Range::new(2.7, 3.2),
        /// Coupling strength for ordinary links.
        coupling: Range = Range::new(0.02, 0.3),
        /// Coupling strength for the synchrony structure.
        strong_coupling: Range = Range::new(0.4, 0.8),
        /// Relative amplitude of forcing on r.
        forcing: Range = Range::new(0.02, 0.1),
        /// Period (iterations) of seasonal forcing.
        seasonal_period: Range = Range::new(8.0, 16.0),
    }
}

spec_table! {
    /// `[families.henon]`: Hénon maps coupled through the squared term.
    HenonSpec {
        /// Systems of this family.
        count: u64 = 0,
        /// Parameter a.
        a: Range = Range::new(1.3, 1.4),
        /// Parameter b.
        b: Range = Range::new(0.3, 0.3),
        /// Coupling strength (mixing fraction) for ordinary links.
        coupling: Range = Range::new(0.05, 0.3),
        /// Coupling strength for the synchrony structure.
        strong_coupling: Range = Range::new(0.5, 0.8),
        /// Relative amplitude of forcing on a.
        forcing: Range = Range::new(0.005, 0.02),
        /// Period (iterations) of seasonal forcing.
        seasonal_period: Range = Range::new(8.0, 16.0),
    }
}

spec_table! {
    /// `[families.lorenz]`: Lorenz flows coupled diffusively through x.
    LorenzSpec {
        /// Systems of this family.
        count: u64 = 0,
        /// sigma.
        sigma: Range = Range::new(10.0, 10.0),
        /// rho.
        rho: Range = Range::new(28.0, 35.0),
        /// beta.
        beta: Range = Range::new(2.6666666666666665, 2.6666666666666665),
        /// Coupling strength for ordinary links.
        coupling: Range = Range::new(0.2, 2.0),
        /// Coupling strength for the synchrony structure.
        strong_coupling: Range = Range::new(6.0, 12.0),
        /// Relative amplitude of forcing on rho.
        forcing: Range = Range::new(0.05, 0.2),
        /// Period (model time) of seasonal forcing.
        seasonal_period: Range = Range::new(2.0, 6.0),
        /// Model time between sampling steps.
        interval: Range = Range::new(0.05, 0.15),
    }
}

spec_table! {
    /// `[families.rossler]`: Rössler flows coupled diffusively through x.
    RosslerSpec {
        /// Systems of this family.
        count: u64 = 0,
        /// Parameter a.
        a: Range = Range::new(0.2, 0.2),
        /// Parameter b.
        b: Range = Range::new(0.2, 0.2),
        /// Parameter c.
        c: Range = Range::new(5.0, 7.0),
        /// Angular frequency scale omega (1 is the classic system).
        omega: Range = Range::new(0.9, 1.1),
        /// Coupling strength for ordinary links.
        coupling: Range = Range::new(0.02, 0.15),
        /// Coupling strength for the synchrony structure.
        strong_coupling: Range = Range::new(0.5, 1.0),
        /// Relative amplitude of forcing on c.
        forcing: Range = Range::new(0.05, 0.2),
        /// Period (model time) of seasonal forcing.
        seasonal_period: Range = Range::new(20.0, 40.0),
        /// Model time between sampling steps.
        interval: Range = Range::new(0.4, 0.9),
    }
}

spec_table! {
    /// `[families.lotka_volterra]`: four-species chaotic competition (Vano et al. 2006).
    LotkaVolterraSpec {
        /// Systems of this family.
        count: u64 = 0,
        /// Relative jitter applied to each growth rate.
        growth_jitter: Range = Range::new(0.0, 0.02),
        /// Competitive coupling strength for ordinary links.
        coupling: Range = Range::new(0.05, 0.4),
        /// Coupling strength for the synchrony structure.
        strong_coupling: Range = Range::new(0.6, 1.0),
        /// Relative amplitude of forcing on growth rates.
        forcing: Range = Range::new(0.05, 0.2),
        /// Period (model time) of seasonal forcing.
        seasonal_period: Range = Range::new(50.0, 150.0),
        /// Model time between sampling steps.
        interval: Range = Range::new(1.0, 3.0),
    }
}

spec_table! {
    /// `[families.consumer_resource]`: seasonally forced Rosenzweig–MacArthur consumer–resource pairs.
    ConsumerResourceSpec {
        /// Systems of this family.
        count: u64 = 0,
        /// Attack rate.
        attack: Range = Range::new(4.0, 6.0),
        /// Handling-time factor.
        handling: Range = Range::new(2.5, 3.5),
        /// Consumer mortality.
        mortality: Range = Range::new(0.3, 0.5),
        /// Immigration coupling strength (resource of one unit into another) for ordinary links.
        coupling: Range = Range::new(0.01, 0.1),
        /// Coupling strength for the synchrony structure.
        strong_coupling: Range = Range::new(0.3, 0.6),
        /// Relative amplitude of seasonal forcing on resource growth.
        forcing: Range = Range::new(0.1, 0.5),
        /// Period (model time) of seasonal forcing.
        seasonal_period: Range = Range::new(10.0, 20.0),
        /// Model time between sampling steps.
        interval: Range = Range::new(0.5, 1.5),
    }
}

spec_table! {
    /// `[families.sir]`: SIRS epidemics with seasonal transmission (time unit: years).
    SirSpec {
        /// Systems of this family.
        count: u64 = 0,
        /// Basic reproduction number.
        r0: Range = Range::new(4.0, 16.0),
        /// Recovery rate gamma (per year).
        recovery: Range = Range::new(26.0, 52.0),
        /// Waning-immunity rate (per year); 0 is SIR.
        waning: Range = Range::new(0.0, 0.3),
        /// Strength of infection pressure from another population.
        coupling: Range = Range::new(0.02, 0.2),
        /// Coupling strength for the synchrony structure.
        strong_coupling: Range = Range::new(0.5, 1.0),
        /// Relative amplitude of seasonal forcing on transmission.
        forcing: Range = Range::new(0.05, 0.3),
        /// Period (years) of seasonal forcing.
        seasonal_period: Range = Range::new(1.0, 1.0),
        /// Years between sampling steps.
        interval: Range = Range::new(0.02, 0.08),
    }
}

spec_table! {
    /// `[families]`: one table per dynamics family; a family with count 0 is not simulated.
    FamiliesSpec {
        /// Coupled logistic maps.
        logistic: LogisticSpec = LogisticSpec::default(),
        /// Ricker maps.
        ricker: RickerSpec = RickerSpec::default(),
        /// Hénon maps.
        henon: HenonSpec = HenonSpec::default(),
        /// Lorenz flows.
        lorenz: LorenzSpec = LorenzSpec::default(),
        /// Rössler flows.
        rossler: RosslerSpec = RosslerSpec::default(),
        /// Lotka–Volterra competition.
        lotka_volterra: LotkaVolterraSpec = LotkaVolterraSpec::default(),
        /// Consumer–resource pairs.
        consumer_resource: ConsumerResourceSpec = ConsumerResourceSpec::default(),
        /// SIR/SIRS epidemics.
        sir: SirSpec = SirSpec::default(),
    }
}

/// A checked simulator spec.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Spec {
    /// Master seed; every system's generator derives from it and the system's index.
    pub seed: u64,
    /// Sampling settings.
    #[serde(default)]
    pub sampling: SamplingSpec,
    /// Noise settings.
    #[serde(default)]
    pub noise: NoiseSpec,
    /// Structure weights.
    #[serde(default)]
    pub structures: StructureWeights,
    /// The `network` structure's size and density.
    #[serde(default)]
    pub network: NetworkSpec,
    /// Families and their parameter ranges.
    #[serde(default)]
    pub families: FamiliesSpec,
    /// Canonical published forms.
    #[serde(default)]
    pub canonical: CanonicalSpec,
}

struct Checker {
    first: Option<SpecError>,
}

impl Checker {
    fn fail(&mut self, e: SpecError) {
        if self.first.is_none() {
            self.first = Some(e);
        }
    }

    fn range(&mut self, key: &str, r: Range) {
        if !r.lo.is_finite() || !r.hi.is_finite() {
            self.fail(SpecError::NonFinite { key: key.into() });
        } else if r.lo > r.hi {
            self.fail(SpecError::InvertedRange {
                key: key.into(),
                lo: r.lo,
                hi: r.hi,
            });
        }
    }

    fn within(&mut self, key: &str, r: Range, lo: f64, hi: f64, allowed: &'static str) {
        self.range(key, r);
        for v in [r.lo, r.hi] {
            if v.is_finite() && !(lo..=hi).contains(&v) {
                self.fail(SpecError::OutOfRange {
                    key: key.into(),
                    value: v,
                    allowed,
                });
            }
        }
    }

    fn positive(&mut self, key: &str, r: Range) {
        self.range(key, r);
        if r.lo.is_finite() && r.lo <= 0.0 {
            self.fail(SpecError::OutOfRange {
                key: key.into(),
                value: r.lo,
                allowed: "(0, inf)",
            });
        }
    }

    fn nonneg(&mut self, key: &str, r: Range) {
        self.within(key, r, 0.0, f64::INFINITY, "[0, inf)");
    }

    fn int(&mut self, key: &str, r: IntRange) {
        if r.lo > r.hi {
            self.fail(SpecError::InvertedRange {
                key: key.into(),
                lo: r.lo as f64,
                hi: r.hi as f64,
            });
        }
    }
}

/// A spec that passed every rule of [`Spec::check`]: the only kind the simulator accepts, so a
/// spec is checked once, where it is read, and never half-checked later. Reads as a [`Spec`].
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(transparent)]
pub struct ValidSpec(Spec);

impl std::ops::Deref for ValidSpec {
    type Target = Spec;
    fn deref(&self) -> &Spec {
        &self.0
    }
}

impl ValidSpec {
    /// The spec itself, to change and check again.
    pub fn into_inner(self) -> Spec {
        self.0
    }
}

impl Spec {
    /// Parses and checks a spec written in TOML.
    pub fn from_toml_str(text: &str) -> Result<ValidSpec, SpecError> {
        let spec: Spec = toml::from_str(text)?;
        spec.check()
    }

    /// Checks every rule; the first broken one is the error.
    pub fn check(self) -> Result<ValidSpec, SpecError> {
        self.validate()?;
        Ok(ValidSpec(self))
    }

    /// Total number of systems the spec asks for.
    pub fn total_count(&self) -> usize {
        self.family_count() + self.canonical.count as usize
    }

    /// Number of family systems (they come first in the numbering).
    pub fn family_count(&self) -> usize {
        crate::family::Family::ALL
            .iter()
            .map(|f| f.count(self) as usize)
            .sum()
    }

    /// Checks every rule; returns the first broken one ([`Spec::check`] keeps the result).
    fn validate(&self) -> Result<(), SpecError> {
        let mut c = Checker { first: None };
        let s = &self.sampling;
        c.int("sampling.length", s.length);
        if s.length.lo < MIN_LENGTH {
            c.fail(SpecError::TooShort {
                min: MIN_LENGTH,
                value: s.length.lo,
            });
        }
        if s.length.hi > MAX_LENGTH {
            c.fail(SpecError::OutOfRange {
                key: "sampling.length".into(),
                value: s.length.hi as f64,
                allowed: "[30, 1000000]",
            });
        }
        c.int("sampling.thinning", s.thinning);
        if s.thinning.hi > 1000 {
            c.fail(SpecError::OutOfRange {
                key: "sampling.thinning".into(),
                value: s.thinning.hi as f64,
                allowed: "[1, 1000]",
            });
        }
        if s.thinning.lo == 0 {
            c.fail(SpecError::OutOfRange {
                key: "sampling.thinning".into(),
                value: 0.0,
                allowed: "[1, inf)",
            });
        }
        c.int("sampling.transient", s.transient);
        c.within("sampling.missing", s.missing, 0.0, 0.5, "[0, 0.5]");
        let clean = self.noise.clean_share;
        if !(0.0..=1.0).contains(&clean) {
            c.fail(SpecError::OutOfRange {
                key: "noise.clean_share".into(),
                value: clean,
                allowed: "[0, 1]",
            });
        }
        c.int("network.units", self.network.units);
        if self.network.units.lo < 3 || self.network.units.hi > MAX_NETWORK_UNITS {
            c.fail(SpecError::OutOfRange {
                key: "network.units".into(),
                value: if self.network.units.lo < 3 {
                    self.network.units.lo as f64
                } else {
                    self.network.units.hi as f64
                },
                allowed: "[3, 16]",
            });
        }
        c.within(
            "network.link_probability",
            self.network.link_probability,
            0.0,
            1.0,
            "[0, 1]",
        );
        for (key, r) in [
            ("noise.observation", self.noise.observation),
            ("noise.process", self.noise.process),
        ] {
            c.range(key, r);
            if r.lo < 0.0 {
                c.fail(SpecError::NegativeNoise {
                    key: key.into(),
                    value: r.lo,
                });
            }
        }
        if self.noise.process.hi > 0.5 {
            c.fail(SpecError::OutOfRange {
                key: "noise.process".into(),
                value: self.noise.process.hi,
                allowed: "[0, 0.5]",
            });
        }
        let w = &self.structures;
        let weights = [
            ("one_way", w.one_way),
            ("two_way", w.two_way),
            ("synchrony", w.synchrony),
            ("chain_observed", w.chain_observed),
            ("chain_hidden", w.chain_hidden),
            ("chain3", w.chain3),
            ("hidden_driver", w.hidden_driver),
            ("shared_seasonality", w.shared_seasonality),
            ("shared_noise", w.shared_noise),
            ("independent", w.independent),
            ("similar_periods", w.similar_periods),
            ("network", w.network),
        ];
        for (k, v) in weights {
            if !v.is_finite() || v < 0.0 {
                c.fail(SpecError::OutOfRange {
                    key: format!("structures.{k}"),
                    value: v,
                    allowed: "[0, inf)",
                });
            }
        }
        if self.family_count() > 0 && weights.iter().all(|(_, v)| *v <= 0.0) {
            c.fail(SpecError::NoStructures);
        }
        let k = &self.canonical;
        let forms = [
            ("logistic_pair", k.logistic_pair),
            ("henon_pair", k.henon_pair),
            ("rossler_lorenz", k.rossler_lorenz),
            ("logistic_chain", k.logistic_chain),
            ("moran_pair", k.moran_pair),
            ("seasonal_epidemics", k.seasonal_epidemics),
            ("forced_population", k.forced_population),
        ];
        for (name, v) in forms {
            if !v.is_finite() || v < 0.0 {
                c.fail(SpecError::OutOfRange {
                    key: format!("canonical.{name}"),
                    value: v,
                    allowed: "[0, inf)",
                });
            }
        }
        if k.count > 0 && forms.iter().all(|(_, v)| *v <= 0.0) {
            c.fail(SpecError::OutOfRange {
                key: "canonical".into(),
                value: 0.0,
                allowed: "at least one form weight > 0",
            });
        }
        if !(0.0..=1.0).contains(&k.unrelated_share) {
            c.fail(SpecError::OutOfRange {
                key: "canonical.unrelated_share".into(),
                value: k.unrelated_share,
                allowed: "[0, 1]",
            });
        }
        if !(0.0..=1.0).contains(&k.uncoupled_share) {
            c.fail(SpecError::OutOfRange {
                key: "canonical.uncoupled_share".into(),
                value: k.uncoupled_share,
                allowed: "[0, 1]",
            });
        }
        let f = &self.families;
        let l = &f.logistic;
        c.within("families.logistic.r", l.r, 0.0, 4.0, "[0, 4]");
        c.nonneg("families.logistic.coupling", l.coupling);
        c.nonneg("families.logistic.strong_coupling", l.strong_coupling);
        c.within("families.logistic.forcing", l.forcing, 0.0, 0.9, "[0, 0.9]");
        c.positive("families.logistic.seasonal_period", l.seasonal_period);
        let r = &f.ricker;
        c.positive("families.ricker.r", r.r);
        c.nonneg("families.ricker.coupling", r.coupling);
        c.nonneg("families.ricker.strong_coupling", r.strong_coupling);
        c.within("families.ricker.forcing", r.forcing, 0.0, 0.9, "[0, 0.9]");
        c.positive("families.ricker.seasonal_period", r.seasonal_period);
        let h = &f.henon;
        c.positive("families.henon.a", h.a);
        c.range("families.henon.b", h.b);
        c.within(
            "families.henon.coupling",
            h.coupling,
            0.0,
            0.95,
            "[0, 0.95]",
        );
        c.within(
            "families.henon.strong_coupling",
            h.strong_coupling,
            0.0,
            0.95,
            "[0, 0.95]",
        );
        c.within("families.henon.forcing", h.forcing, 0.0, 0.9, "[0, 0.9]");
        c.positive("families.henon.seasonal_period", h.seasonal_period);
        let z = &f.lorenz;
        c.positive("families.lorenz.sigma", z.sigma);
        c.positive("families.lorenz.rho", z.rho);
        c.positive("families.lorenz.beta", z.beta);
        c.nonneg("families.lorenz.coupling", z.coupling);
        c.nonneg("families.lorenz.strong_coupling", z.strong_coupling);
        c.within("families.lorenz.forcing", z.forcing, 0.0, 0.9, "[0, 0.9]");
        c.positive("families.lorenz.seasonal_period", z.seasonal_period);
        c.positive("families.lorenz.interval", z.interval);
        let o = &f.rossler;
        c.positive("families.rossler.a", o.a);
        c.positive("families.rossler.b", o.b);
        c.positive("families.rossler.c", o.c);
        c.positive("families.rossler.omega", o.omega);
        c.nonneg("families.rossler.coupling", o.coupling);
        c.nonneg("families.rossler.strong_coupling", o.strong_coupling);
        c.within("families.rossler.forcing", o.forcing, 0.0, 0.9, "[0, 0.9]");
        c.positive("families.rossler.seasonal_period", o.seasonal_period);
        c.positive("families.rossler.interval", o.interval);
        let v = &f.lotka_volterra;
        c.within(
            "families.lotka_volterra.growth_jitter",
            v.growth_jitter,
            0.0,
            0.5,
            "[0, 0.5]",
        );
        c.nonneg("families.lotka_volterra.coupling", v.coupling);
        c.nonneg("families.lotka_volterra.strong_coupling", v.strong_coupling);
        c.within(
            "families.lotka_volterra.forcing",
            v.forcing,
            0.0,
            0.9,
            "[0, 0.9]",
        );
        c.positive("families.lotka_volterra.seasonal_period", v.seasonal_period);
        c.positive("families.lotka_volterra.interval", v.interval);
        let q = &f.consumer_resource;
        c.positive("families.consumer_resource.attack", q.attack);
        c.positive("families.consumer_resource.handling", q.handling);
        c.positive("families.consumer_resource.mortality", q.mortality);
        c.nonneg("families.consumer_resource.coupling", q.coupling);
        c.nonneg(
            "families.consumer_resource.strong_coupling",
            q.strong_coupling,
        );
        c.within(
            "families.consumer_resource.forcing",
            q.forcing,
            0.0,
            0.9,
            "[0, 0.9]",
        );
        c.positive(
            "families.consumer_resource.seasonal_period",
            q.seasonal_period,
        );
        c.positive("families.consumer_resource.interval", q.interval);
        let e = &f.sir;
        c.positive("families.sir.r0", e.r0);
        c.positive("families.sir.recovery", e.recovery);
        c.nonneg("families.sir.waning", e.waning);
        c.nonneg("families.sir.coupling", e.coupling);
        c.nonneg("families.sir.strong_coupling", e.strong_coupling);
        c.within("families.sir.forcing", e.forcing, 0.0, 0.9, "[0, 0.9]");
        c.positive("families.sir.seasonal_period", e.seasonal_period);
        c.within(
            "families.sir.interval",
            e.interval,
            1e-4,
            1.0,
            "[0.0001, 1]",
        );
        if self.total_count() == 0 {
            c.fail(SpecError::NoSystems);
        }
        match c.first {
            Some(e) => Err(e),
            None => Ok(()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const MIN: &str = "seed = 1\n[families.logistic]\ncount = 2\n";

    #[test]
    fn minimal_spec_parses_with_defaults() {
        let s = Spec::from_toml_str(MIN).unwrap();
        assert_eq!(s.total_count(), 2);
        assert_eq!(s.sampling.length, IntRange::new(150, 600));
    }

    #[test]
    fn single_number_is_a_point_range() {
        let s = Spec::from_toml_str(
            "seed = 1\n[sampling]\nlength = 100\n[families.henon]\ncount = 1\n",
        )
        .unwrap();
        assert_eq!(s.sampling.length, IntRange::new(100, 100));
    }

    #[test]
    fn unknown_key_is_named() {
        let e = Spec::from_toml_str("seed = 1\n[families.logistic]\ncount = 1\nrr = 3.0\n")
            .unwrap_err();
        assert!(matches!(e, SpecError::Parse(_)));
        assert!(e.to_string().contains("rr"), "{e}");
    }

    #[test]
    fn unknown_family_is_rejected() {
        let e = Spec::from_toml_str("seed = 1\n[families.duffing]\ncount = 1\n").unwrap_err();
        assert!(e.to_string().contains("duffing"), "{e}");
    }

    #[test]
    fn inverted_range_is_rejected() {
        let e = Spec::from_toml_str(&format!("{MIN}r = [3.9, 3.6]\n")).unwrap_err();
        assert!(
            matches!(e, SpecError::InvertedRange { ref key, .. } if key == "families.logistic.r"),
            "{e}"
        );
    }

    #[test]
    fn negative_noise_is_rejected() {
        let e = Spec::from_toml_str(
            "seed = 1\n[noise]\nobservation = [-0.1, 0.2]\n[families.ricker]\ncount = 1\n",
        )
        .unwrap_err();
        assert!(matches!(e, SpecError::NegativeNoise { .. }), "{e}");
    }

    #[test]
    fn short_length_is_rejected() {
        let e = Spec::from_toml_str(
            "seed = 1\n[sampling]\nlength = [10, 100]\n[families.ricker]\ncount = 1\n",
        )
        .unwrap_err();
        assert!(matches!(e, SpecError::TooShort { value: 10, .. }), "{e}");
    }

    #[test]
    fn huge_length_is_rejected() {
        let e = Spec::from_toml_str(
            "seed = 1\n[sampling]\nlength = [100, 10000000]\n[families.ricker]\ncount = 1\n",
        )
        .unwrap_err();
        assert!(
            matches!(e, SpecError::OutOfRange { ref key, .. } if key == "sampling.length"),
            "{e}"
        );
    }

    #[test]
    fn zero_counts_are_rejected() {
        let e = Spec::from_toml_str("seed = 1\n").unwrap_err();
        assert!(matches!(e, SpecError::NoSystems), "{e}");
    }

    #[test]
    fn zero_weights_are_rejected() {
        let text = "seed = 1\n[structures]\none_way = 0\ntwo_way = 0\nsynchrony = 0\nchain_observed = 0\n\
                    chain_hidden = 0\nchain3 = 0\nhidden_driver = 0\nshared_seasonality = 0\nshared_noise = 0\n\
                    independent = 0\nsimilar_periods = 0\nnetwork = 0\n[families.ricker]\ncount = 1\n";
        assert!(matches!(
            Spec::from_toml_str(text).unwrap_err(),
            SpecError::NoStructures
        ));
    }

    #[test]
    fn spec_round_trips_through_toml() {
        let s = Spec::from_toml_str(MIN).unwrap();
        let back = Spec::from_toml_str(&toml::to_string(&s).unwrap()).unwrap();
        assert_eq!(s, back);
    }

    #[test]
    fn network_size_is_checked() {
        let ok = Spec::from_toml_str(&format!("{MIN}[network]\nunits = [8, 12]\n")).unwrap();
        assert_eq!(ok.network.units, IntRange::new(8, 12));
        for bad in [
            "units = [2, 5]",
            "units = [3, 17]",
            "link_probability = 1.5",
        ] {
            let e = Spec::from_toml_str(&format!(
                "seed = 1\n[network]\n{bad}\n[families.ricker]\ncount = 1\n"
            ))
            .unwrap_err();
            assert!(matches!(e, SpecError::OutOfRange { .. }), "{bad}: {e}");
        }
    }
}
