//! One engine-options value: every setting of the k-means engine except K and pinned
//! means, shared unchanged by every workflow and recorded whole in every document.

use super::params::{MAX_ITER, MAX_RESTARTS};
use super::{Anneal, Beta, KMeansParams, Mode, Refine};
use crate::error::ParamsError;
use serde::{Deserialize, Serialize};

/// Settings of the k-means engine; defaults are [`KMeansParams::new`]'s.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct EngineOptions {
    /// Hard or soft. Default: hard.
    pub mode: Mode,
    /// Soft-assignment sharpness. Default: auto.
    pub beta: Beta,
    /// Seed of the ChaCha8 generator. Default: [`crate::rng::DEFAULT_SEED`].
    pub seed: u64,
    /// Independent starts; the lowest SSE is kept. Default: 1.
    pub restarts: usize,
    /// Most iterations for each of the hard and soft phases. Default: 300.
    pub max_iter: usize,
    /// Relative objective change of one iteration that ends the iterations. Default: 1e-6.
    pub tolerance: f64,
    /// Summed squared moves of the means, relative to the data's mean variance per
    /// dimension, that end the hard phase. Default: 1e-4.
    pub shift_tolerance: f64,
    /// Global refinement after each k-means++ start, so that a fit does not stop in the
    /// first local minimum. Default: split-and-merge, at most 32 moves ([`Refine`]).
    pub refine: Refine,
    /// Start from deterministic annealing instead of k-means++. Default: off.
    pub anneal: Option<Anneal>,
    /// Most split-and-merge moves after each k-means++ start. Default: 0.
    pub split_merge: usize,
}

impl Default for EngineOptions {
    fn default() -> Self {
        EngineOptions {
            mode: Mode::Hard,
            beta: Beta::Auto,
            seed: crate::rng::DEFAULT_SEED,
            restarts: 1,
            max_iter: 300,
            tolerance: 1e-6,
            shift_tolerance: 1e-4,
            refine: Refine::default(),
            anneal: None,
            split_merge: 0,
        }
    }
}

impl EngineOptions {
    /// Parameters for `k` clusters with these settings (check them with
    /// [`KMeansParams::check`]).
    pub fn params(&self, k: usize) -> KMeansParams {
        KMeansParams {
            engine: *self,
            ..KMeansParams::new(k)
        }
    }

    /// Checks every rule of the settings: the same checks wherever they are given.
    pub fn check(&self) -> Result<(), ParamsError> {
        if let Beta::Fixed(b) = self.beta {
            if !(b.is_finite() && b > 0.0) {
                return Err(ParamsError::BadBeta(b));
            }
        }
        if !(self.tolerance.is_finite() && self.tolerance >= 0.0) {
            return Err(ParamsError::BadTolerance(self.tolerance));
        }
        if !(self.shift_tolerance.is_finite() && self.shift_tolerance >= 0.0) {
            return Err(ParamsError::BadShiftTolerance(self.shift_tolerance));
        }
        if let Some(a) = &self.anneal {
            a.check()?;
        }
        self.refine.check()?;
        // Upper bounds keep a typing slip from running for hours.
        if self.max_iter == 0 || self.max_iter > MAX_ITER {
            return Err(ParamsError::BadMaxIter(self.max_iter));
        }
        if self.restarts == 0 || self.restarts > MAX_RESTARTS {
            return Err(ParamsError::BadRestarts(self.restarts));
        }
        Ok(())
    }

    /// The settings that differ from the defaults, by their names in documents: what a
    /// command that does not use them must say it ignored.
    pub fn changed(&self) -> Vec<&'static str> {
        let d = EngineOptions::default();
        let mut out = Vec::new();
        let mut note = |differs: bool, name| {
            if differs {
                out.push(name);
            }
        };
        note(self.mode != d.mode, "mode");
        note(self.beta != d.beta, "beta");
        note(self.seed != d.seed, "seed");
        note(self.restarts != d.restarts, "restarts");
        note(self.max_iter != d.max_iter, "max_iter");
        note(self.tolerance != d.tolerance, "tolerance");
        note(self.shift_tolerance != d.shift_tolerance, "shift_tolerance");
        note(self.refine != d.refine, "refine");
        note(self.anneal != d.anneal, "anneal");
        note(self.split_merge != d.split_merge, "split_merge");
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_are_the_parameters_defaults_and_round_trip() {
        let e = EngineOptions::default();
        assert_eq!(e.params(5), KMeansParams::new(5));
        assert!(e.changed().is_empty());
        let e2 = EngineOptions { restarts: 4, ..e };
        assert_eq!(e2.changed(), ["restarts"]);
        let json = serde_json::to_value(e).unwrap();
        assert_eq!(json["beta"], "auto");
        assert_eq!(json["mode"], "hard");
        assert!(json["anneal"].is_null());
    }
}
