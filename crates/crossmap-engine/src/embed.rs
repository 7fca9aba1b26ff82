//! Delay embedding (Takens 1981): a variable's delay vectors, with those touching a missing
//! value left out. The choice of delay and dimension is in `choose.rs`.

use crate::EngineError;

/// The embedding chosen for one variable.
#[derive(Debug, Clone, PartialEq)]
pub struct Embedding {
    /// Embedding dimension.
    pub e: usize,
    /// Delay in time steps.
    pub tau: usize,
    /// Simplex one-step forecast skill at the chosen E.
    pub simplex_skill: f64,
    /// Simplex skill for E = 1..=max_e (NaN where not computable), for the record.
    pub skill_by_e: Vec<f64>,
    /// Delay vectors left out because they touch a missing value.
    pub vectors_excluded: usize,
}

/// Default Theiler window: `tau * (E - 1)` steps, the time span of one delay vector.
///
/// Delay vectors closer in time than their own span share coordinates with the query, so their
/// closeness is partly trivial (Theiler 1986); excluding them costs few neighbours. For E = 1 this
/// is 0, i.e. only the point itself is excluded.
pub fn default_theiler(e: usize, tau: usize) -> usize {
    tau * e.saturating_sub(1)
}

/// The delay vectors of one series: `v(t) = (x[t], x[t - tau], ..., x[t - (E-1) tau])`.
///
/// Only vectors that touch no missing (non-finite) value are kept; each kept vector is a
/// *position* `0..len()` with its time index `time(p)`.
#[derive(Debug, Clone, PartialEq)]
pub struct Manifold {
    e: usize,
    tau: usize,
    series_len: usize,
    times: Vec<u32>,
    coords: Vec<f64>,
    position_of_time: Vec<u32>,
}

const NO_POSITION: u32 = u32::MAX;

impl Manifold {
    /// Embed `x` with dimension `e` and delay `tau`.
    pub fn new(x: &[f64], e: usize, tau: usize) -> Result<Self, EngineError> {
        if e == 0 {
            return Err(EngineError::EmbeddingDimensionZero);
        }
        if tau == 0 {
            return Err(EngineError::DelayZero);
        }
        let span = (e - 1) * tau;
        if x.len() <= span {
            return Err(EngineError::SeriesTooShort {
                variable: None,
                usable: 0,
                needed: span + 1,
                e,
                tau,
            });
        }
        let mut times = Vec::with_capacity(x.len() - span);
        let mut coords = Vec::with_capacity((x.len() - span) * e);
        let mut position_of_time = vec![NO_POSITION; x.len()];
        for t in span..x.len() {
            if (0..e).all(|j| x[t - j * tau].is_finite()) {
                position_of_time[t] = times.len() as u32;
                times.push(t as u32);
                coords.extend((0..e).map(|j| x[t - j * tau]));
            }
        }
        Ok(Self {
            e,
            tau,
            series_len: x.len(),
            times,
            coords,
            position_of_time,
        })
    }

    /// Embedding dimension.
    pub fn e(&self) -> usize {
        self.e
    }

    /// Delay.
    pub fn tau(&self) -> usize {
        self.tau
    }

    /// Number of valid delay vectors.
    pub fn len(&self) -> usize {
        self.times.len()
    }

    /// True when no delay vector is valid.
    pub fn is_empty(&self) -> bool {
        self.times.is_empty()
    }

    /// Length of the embedded series.
    pub fn series_len(&self) -> usize {
        self.series_len
    }

    /// Delay vectors that could exist but touch a missing value.
    pub fn vectors_excluded(&self) -> usize {
        self.series_len - (self.e - 1) * self.tau - self.len()
    }

    /// Time index of position `p`.
    #[inline]
    pub fn time(&self, p: usize) -> usize {
        self.times[p] as usize
    }

    /// Position of the delay vector at time `t`, if valid.
    pub fn position(&self, t: usize) -> Option<usize> {
        match self.position_of_time.get(t) {
            Some(&p) if p != NO_POSITION => Some(p as usize),
            _ => None,
        }
    }

    /// Coordinates of position `p`.
    #[inline]
    pub fn point(&self, p: usize) -> &[f64] {
        &self.coords[p * self.e..(p + 1) * self.e]
    }

    /// Squared Euclidean distance between positions `a` and `b`.
    #[inline]
    pub fn dist2(&self, a: usize, b: usize) -> f64 {
        sq_dist(self.point(a), self.point(b))
    }
}

/// Squared Euclidean distance, summed in coordinate order (every caller sums the same way, so
/// scan and walk agree to the last bit).
#[inline]
pub(crate) fn sq_dist(a: &[f64], b: &[f64]) -> f64 {
    let mut s = 0.0;
    for (x, y) in a.iter().zip(b) {
        let d = x - y;
        s += d * d;
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn vectors_follow_the_delay_definition_and_skip_missing() {
        let x = [0.0, 1.0, 2.0, f64::NAN, 4.0, 5.0, 6.0, 7.0];
        let m = Manifold::new(&x, 2, 2).unwrap();
        // Times 2..8 exist; those touching t = 3 (t = 3, 5) are left out (Takens 1981 delay map).
        let times: Vec<usize> = (0..m.len()).map(|p| m.time(p)).collect();
        assert_eq!(times, vec![2, 4, 6, 7]);
        assert_eq!(m.point(1), &[4.0, 2.0]);
        assert_eq!(m.vectors_excluded(), 2);
        assert_eq!(m.position(5), None);
        assert_eq!(m.position(6), Some(2));
    }
}
