//! The dominant cycle of a series: its period, found from the periodogram, and its mean shape by
//! phase.
//!
//! Seasonal surrogates (Deyle et al. 2016) keep a driver's regular cycle and scramble only its
//! anomalies, so they ask whether the driver's skill is more than a shared rhythm. They need a
//! period; this module finds one when none is given, for any series, seasonal or not:
//! the strength of the cycle says how much of the variance it carries, and a weak cycle makes the
//! seasonal surrogate nearly a plain phase-randomised one.
//!
//! Rules:
//! - candidates are the [`CANDIDATES`] largest periodogram peaks (after removing the mean) with
//!   periods from [`MIN_PERIOD`] samples to a third of the series, so every candidate repeats at
//!   least three times; the floor of 4 samples keeps a map's own period-2 or period-3
//!   oscillation (coupled logistic maps show one with strength up to 0.97) from being taken for
//!   an outside rhythm, whose seasonal surrogates would then keep the very dynamics under test;
//! - each candidate period `p` is refined on a grid of `p (1 + j / 200)`, `j = -8..=8` (within
//!   ±4 %, which spans the periodogram's bin width for three or more cycles), scoring the
//!   adjusted R² of the mean cycle by phase;
//! - the mean cycle by phase puts sample `t` in bin `floor(B frac(t / p))` with
//!   `B = round(p)` bins, at most [`MAX_BINS`] and at most a third of the finite samples; for a
//!   whole-number period of at most [`MAX_BINS`] samples that is the mean at each `t mod p`;
//! - strength is the adjusted R² (`1 - (SS_res / (n - B)) / (SS_tot / (n - 1))`, floored at 0),
//!   so more bins do not score better by chance;
//! - a detected cycle counts as a season only with strength at least [`MIN_SEASON_STRENGTH`];
//!   a weaker one is reported with strength 0, and its seasonal surrogates are plain
//!   phase-randomised ones (there is no cycle to keep). A period the user gives always counts.

use realfft::RealFftPlanner;

/// Shortest period considered, in samples.
pub const MIN_PERIOD: f64 = 4.0;
/// Weakest detected cycle (adjusted R² of the mean cycle) taken as a season. Below it the mean
/// cycle explains less than a tenth of the variance, and white noise of 200 points reaches
/// about 0.05 by chance over the candidate periods.
pub const MIN_SEASON_STRENGTH: f64 = 0.1;
/// Largest number of phase bins of the mean cycle.
pub const MAX_BINS: usize = 24;
/// Periodogram peaks refined.
pub const CANDIDATES: usize = 5;

/// A series' dominant cycle.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Season {
    /// Period in samples (not necessarily whole).
    pub period: f64,
    /// Share of variance carried by the mean cycle (adjusted R², in [0, 1]).
    pub strength: f64,
}

/// Number of phase bins for `period` with `finite` usable samples.
fn bins(period: f64, finite: usize) -> usize {
    (period.round() as usize)
        .clamp(2, MAX_BINS)
        .min(finite / 3)
        .max(1)
}

/// Phase bin of sample `t`: `floor(B frac(t / p))`, with the phase taken as `fmod(t, p) / p`.
#[cfg(test)]
fn bin_of(t: usize, period: f64, b: usize) -> usize {
    bin_of_phase(t as f64 % period, period, b)
}

#[inline]
fn bin_of_phase(fmod: f64, period: f64, b: usize) -> usize {
    let phase = fmod / period;
    ((phase * b as f64 + 1e-9).floor() as usize).min(b - 1)
}

/// `fmod(t, period)` for `t = 0, 1, 2, ...`, exact to the last bit like the `%` operator but
/// without a division per sample: the period is `m 2^x` with a whole number `m`, so
/// `t mod period` is `(t 2^-x mod m) 2^x`, and the remainder is stepped by whole numbers.
struct Remainders {
    period: f64,
    t: usize,
    kind: RemainderKind,
}

enum RemainderKind {
    /// A whole-number period `modulus` (below 2^63): `r = t mod modulus`.
    Whole { modulus: u64, r: u64 },
    /// A period of `m 2^-shift`: `r = t 2^shift mod m`, stepped by `inc = 2^shift mod m`.
    Fraction {
        m: u64,
        inc: u64,
        scale: f64,
        r: u64,
    },
    /// Anything else (a period of 2^63 or more, subnormal or tiny): the `%` operator.
    Plain,
}

impl Remainders {
    fn new(period: f64) -> Self {
        let bits = period.to_bits();
        let exp = ((bits >> 52) & 0x7ff) as i64;
        let kind = if !(period.is_finite() && period > 0.0) || exp == 0 {
            RemainderKind::Plain
        } else {
            let m = (bits & ((1u64 << 52) - 1)) | (1u64 << 52);
            let x = exp - 1075;
            if (0..=10).contains(&x) {
                RemainderKind::Whole {
                    modulus: m << x,
                    r: 0,
                }
            } else if (-62..0).contains(&x) {
                let shift = (-x) as u32;
                RemainderKind::Fraction {
                    m,
                    inc: ((1u128 << shift) % u128::from(m)) as u64,
                    scale: f64::from_bits((1023 - u64::from(shift)) << 52),
                    r: 0,
                }
            } else {
                RemainderKind::Plain
            }
        };
        Self { period, t: 0, kind }
    }
}

impl Iterator for Remainders {
    type Item = f64;

    #[inline]
    fn next(&mut self) -> Option<f64> {
        let t = self.t;
        self.t += 1;
        Some(match &mut self.kind {
            RemainderKind::Whole { modulus, r } => {
                let v = *r as f64;
                *r += 1;
                if *r == *modulus {
                    *r = 0;
                }
                v
            }
            RemainderKind::Fraction { m, inc, scale, r } => {
                let v = *r as f64 * *scale;
                *r += *inc;
                if *r >= *m {
                    *r -= *m;
                }
                v
            }
            RemainderKind::Plain => t as f64 % self.period,
        })
    }
}

/// The phase bin of every sample `0..len`, equal to `bin_of` sample by sample.
fn phase_bins(len: usize, period: f64, b: usize) -> Vec<usize> {
    Remainders::new(period)
        .take(len)
        .map(|r| bin_of_phase(r, period, b))
        .collect()
}

/// The mean cycle at every sample: the mean of the finite values in the sample's phase bin
/// (the overall mean where a bin has none). Missing samples get the cycle value too.
pub fn mean_cycle(x: &[f64], period: f64) -> Vec<f64> {
    let finite = x.iter().filter(|v| v.is_finite()).count();
    if finite == 0 || period.is_nan() || period <= 0.0 {
        return vec![0.0; x.len()];
    }
    let b = bins(period, finite);
    let bin = phase_bins(x.len(), period, b);
    let mut sum = vec![0.0; b];
    let mut count = vec![0usize; b];
    for (&v, &k) in x.iter().zip(&bin) {
        if v.is_finite() {
            sum[k] += v;
            count[k] += 1;
        }
    }
    let overall = sum.iter().sum::<f64>() / finite as f64;
    let means: Vec<f64> = sum
        .iter()
        .zip(&count)
        .map(|(&s, &c)| if c > 0 { s / c as f64 } else { overall })
        .collect();
    bin.iter().map(|&k| means[k]).collect()
}

/// Strength of the cycle with this period (adjusted R² of the mean cycle by phase).
pub fn season_at(x: &[f64], period: f64) -> Season {
    let finite: Vec<(usize, f64)> = x
        .iter()
        .copied()
        .enumerate()
        .filter(|(_, v)| v.is_finite())
        .collect();
    let n = finite.len();
    let b = bins(period, n);
    if n < 4 || b < 2 || n <= b {
        return Season {
            period,
            strength: 0.0,
        };
    }
    let cycle = mean_cycle(x, period);
    let mean = finite.iter().map(|(_, v)| v).sum::<f64>() / n as f64;
    let ss_tot: f64 = finite.iter().map(|(_, v)| (v - mean).powi(2)).sum();
    let ss_res: f64 = finite.iter().map(|&(t, v)| (v - cycle[t]).powi(2)).sum();
    let strength = if ss_tot > 0.0 {
        (1.0 - (ss_res / (n - b) as f64) / (ss_tot / (n - 1) as f64)).clamp(0.0, 1.0)
    } else {
        0.0
    };
    Season { period, strength }
}

/// The dominant cycle of `x` (missing values ignored), or `None` when the series is too short
/// to hold three cycles of the shortest period.
pub fn detect_season(x: &[f64]) -> Option<Season> {
    let n = x.len();
    let finite: Vec<f64> = x.iter().copied().filter(|v| v.is_finite()).collect();
    if (finite.len() as f64) < 3.0 * MIN_PERIOD.max(2.0) + 1.0 || n < 8 {
        return None;
    }
    let mean = finite.iter().sum::<f64>() / finite.len() as f64;
    let mut input: Vec<f64> = x
        .iter()
        .map(|&v| if v.is_finite() { v - mean } else { 0.0 })
        .collect();
    let fft = RealFftPlanner::<f64>::new().plan_fft_forward(n);
    let mut spectrum = fft.make_output_vec();
    fft.process(&mut input, &mut spectrum).ok()?;
    let power: Vec<f64> = spectrum.iter().map(|c| c.norm_sqr()).collect();
    // Bin k has period n / k; keep 3 <= k (at least three cycles) and n / k >= MIN_PERIOD.
    let k_min = 3;
    let k_max = ((n as f64 / MIN_PERIOD).floor() as usize).min(power.len() - 1);
    let mut peaks: Vec<usize> = (k_min..=k_max)
        .filter(|&k| {
            let left = if k > k_min { power[k - 1] } else { 0.0 };
            let right = if k < k_max { power[k + 1] } else { 0.0 };
            power[k] > 0.0 && power[k] >= left && power[k] >= right
        })
        .collect();
    peaks.sort_by(|&a, &b| power[b].total_cmp(&power[a]).then(a.cmp(&b)));
    peaks.truncate(CANDIDATES);
    let mut best: Option<Season> = None;
    for k in peaks {
        let centre = n as f64 / k as f64;
        for j in -8i32..=8 {
            let period = centre * (1.0 + j as f64 / 200.0);
            if period < MIN_PERIOD || period > n as f64 / 3.0 {
                continue;
            }
            let s = season_at(x, period);
            if best.is_none_or(|b| s.strength > b.strength) {
                best = Some(s);
            }
        }
    }
    best.or(Some(Season {
        period: MIN_PERIOD,
        strength: 0.0,
    }))
}

impl Season {
    /// Whether there is a cycle for seasonal surrogates to keep (strength above zero).
    pub fn has_cycle(&self) -> bool {
        self.strength > 0.0
    }
}

/// The cycle used for seasonal surrogates: at the given period when one is known, else the
/// detected one, with strength 0 when it is weaker than [`MIN_SEASON_STRENGTH`].
pub fn season_for(x: &[f64], known_period: Option<usize>) -> Option<Season> {
    match known_period {
        Some(p) => Some(season_at(x, p as f64)),
        None => detect_season(x).map(|s| Season {
            strength: if s.strength >= MIN_SEASON_STRENGTH {
                s.strength
            } else {
                0.0
            },
            ..s
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_a_non_integer_period_under_noise() {
        // A 2-harmonic cycle of period 12.5 samples plus a deterministic pseudo-noise.
        let x: Vec<f64> = (0..400)
            .map(|t| {
                let ph = 2.0 * std::f64::consts::PI * t as f64 / 12.5;
                ph.sin() + 0.4 * (2.0 * ph).cos() + 0.3 * ((t * 7919 % 101) as f64 / 50.0 - 1.0)
            })
            .collect();
        let s = detect_season(&x).unwrap();
        assert!((s.period - 12.5).abs() < 0.15, "{s:?}");
        assert!(s.strength > 0.8, "{s:?}");
    }

    #[test]
    fn a_logistic_map_period_two_oscillation_is_no_season() {
        // The logistic map at r = 3.5 settles on a period-4 cycle and at r = 3.2 on period 2
        // (May 1976); at r = 3.8 it is chaotic with a strong alternation. None of these is an
        // outside rhythm, and the chaotic one must not count as a season.
        let mut x = vec![0.4];
        for _ in 0..600 {
            let v = *x.last().unwrap();
            x.push(3.8 * v * (1.0 - v));
        }
        let s = season_for(&x[100..], None).unwrap();
        assert!(s.period >= MIN_PERIOD, "{s:?}");
        assert!(!s.has_cycle(), "{s:?}");
    }

    /// The stepped remainders equal the `%` operator (IEEE 754 fmod, exact) bit for bit, for
    /// the refinement grid's periods and a few awkward ones.
    #[test]
    fn stepped_remainders_equal_fmod_bit_for_bit() {
        let mut periods = vec![
            4.0,
            12.0,
            12.5,
            2.0f64.sqrt() * 7.0,
            1e-3,
            0.3,
            1e6,
            3e18,
            1e300,
        ];
        for k in [3usize, 7, 40, 333] {
            for j in -8i32..=8 {
                periods.push(20_000.0 / k as f64 * (1.0 + j as f64 / 200.0));
            }
        }
        for p in periods {
            for (t, r) in Remainders::new(p).take(20_000).enumerate() {
                assert_eq!(r.to_bits(), (t as f64 % p).to_bits(), "t={t} p={p}");
            }
            let b = bins(p, 20_000);
            let bins_all = phase_bins(20_000, p, b);
            assert!(
                bins_all
                    .iter()
                    .enumerate()
                    .all(|(t, &k)| k == bin_of(t, p, b))
            );
        }
    }

    #[test]
    fn whole_number_period_bins_are_t_mod_p() {
        let x: Vec<f64> = (0..120).map(|t| ((t * t) % 17) as f64).collect();
        let c = mean_cycle(&x, 12.0);
        for (t, ct) in c.iter().enumerate() {
            let same: Vec<f64> = (0..120)
                .filter(|u| u % 12 == t % 12)
                .map(|u| x[u])
                .collect();
            let m = same.iter().sum::<f64>() / same.len() as f64;
            assert!((ct - m).abs() < 1e-12);
        }
    }

    #[test]
    fn white_noise_has_a_weak_cycle_and_gaps_are_ignored() {
        let mut h = 7u64;
        let mut x: Vec<f64> = (0..500)
            .map(|_| {
                h ^= h << 13;
                h ^= h >> 7;
                h ^= h << 17;
                (h >> 11) as f64 / (1u64 << 53) as f64
            })
            .collect();
        x[10] = f64::NAN;
        let s = detect_season(&x).unwrap();
        assert!(s.strength < MIN_SEASON_STRENGTH, "{s:?}");
        assert_eq!(season_for(&x, None).unwrap().strength, 0.0);
        assert!(detect_season(&x[..5]).is_none());
        assert_eq!(season_at(&vec![1.0; 50], 5.0).strength, 0.0);
    }
}
