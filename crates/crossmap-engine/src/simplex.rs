//! Simplex projection forecasts (Sugihara & May 1990), used to choose the embedding dimension.

use crate::EngineError;
use crate::crossmap::estimate_with;
use crate::embed::Manifold;
use crate::neighbours::{KdTree, Library};

/// Forecasts of one series from its own delay embedding.
#[derive(Debug, Clone, PartialEq)]
pub struct Forecast {
    /// `predictions[t]`: forecast of `x(t + horizon)` from the state at `t`; NaN where none.
    pub predictions: Vec<f64>,
    /// Pearson r of forecasts against observed values over all predicted points.
    pub skill: f64,
    /// Number of predicted points.
    pub predicted: usize,
}

/// Simplex projection `horizon` steps ahead: every valid state is forecast from its E+1 nearest
/// neighbours in the whole series (leave-out by the Theiler window `theiler`, the point itself
/// always excluded), weighted `exp(-d_i/d_1)`. Neighbours whose future is missing or beyond the
/// end are skipped in favour of the next nearest. Neighbours are found with an exact k-d tree
/// (the same neighbours, to the last bit, as an exact scan of the whole series).
pub fn simplex_forecast(
    x: &[f64],
    e: usize,
    tau: usize,
    horizon: usize,
    theiler: usize,
) -> Result<Forecast, EngineError> {
    let m = Manifold::new(x, e, tau)?;
    let needed = e + 2 + 2 * theiler + horizon;
    if m.len() < needed {
        return Err(EngineError::SeriesTooShort {
            variable: None,
            usable: m.len(),
            needed,
            e,
            tau,
        });
    }
    let library = Library::all(m.len());
    let r = estimate_with(&m, &library, &KdTree::new(&m, theiler), x, horizon as i32);
    Ok(Forecast {
        predictions: r.estimates,
        skill: r.skill,
        predicted: r.predicted,
    })
}
