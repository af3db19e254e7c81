//! Progress reporting and cancellation for long computations.

/// Receives progress from long computations. Returning `false` from
/// [`Progress::update`] asks the computation to stop; it then returns
/// [`crate::Error::Cancelled`] at the next check.
pub trait Progress {
    /// `stage` is a short plain phrase ("transforming images", "fitting
    /// frequencies", "building generators"; applying a model: "computing residuals");
    /// `fraction` runs from 0 to 1 within the stage.
    fn update(&mut self, stage: &str, fraction: f64) -> bool;
}

/// Progress sink that never cancels and prints nothing.
pub struct Silent;

impl Progress for Silent {
    fn update(&mut self, _stage: &str, _fraction: f64) -> bool {
        true
    }
}

impl<F: FnMut(&str, f64) -> bool> Progress for F {
    fn update(&mut self, stage: &str, fraction: f64) -> bool {
        self(stage, fraction)
    }
}
