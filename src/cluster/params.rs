//! Checked k-means parameters: a builder with documented defaults and `check()`.

use crate::error::ParamsError;

/// Largest K accepted.
pub const MAX_K: usize = 65_535;
/// Most k-means++ starts accepted.
pub const MAX_RESTARTS: usize = 1000;
/// Most iterations per phase accepted.
pub const MAX_ITER: usize = 100_000;

/// Hard (each row one cluster) or soft (each row a probability over clusters).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Mode {
    /// Lloyd iterations to a fixed point.
    Hard,
    /// Soft k-means, r_ik ∝ exp(−β·½‖x_i − m_k‖²), started from the hard solution.
    Soft,
}

impl std::str::FromStr for Mode {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s.to_ascii_lowercase().as_str() {
            "hard" => Ok(Mode::Hard),
            "soft" => Ok(Mode::Soft),
            _ => Err(format!("unknown mode '{s}' (use hard or soft)")),
        }
    }
}

impl Mode {
    /// Lowercase name, as in documents.
    pub fn name(self) -> &'static str {
        match self {
            Mode::Hard => "hard",
            Mode::Soft => "soft",
        }
    }
}

/// Sharpness of the soft assignment.
///
/// β multiplies d = ½‖x − m‖², so it is in 1/(feature unit)²: 1/ΔE*ab² for CIELAB.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Beta {
    /// β = 1/σ², σ² the pooled within-cluster variance per dimension of the hard solution.
    Auto,
    /// A given positive, finite β.
    Fixed(f64),
}

/// Written as `"auto"` or the number.
impl serde::Serialize for Beta {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        match self {
            Beta::Auto => s.serialize_str("auto"),
            Beta::Fixed(b) => s.serialize_f64(*b),
        }
    }
}

impl<'de> serde::Deserialize<'de> for Beta {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        #[derive(serde::Deserialize)]
        #[serde(untagged)]
        enum Written {
            Number(f64),
            Text(String),
        }
        match Written::deserialize(d)? {
            Written::Number(b) => Ok(Beta::Fixed(b)),
            Written::Text(t) => t.parse().map_err(serde::de::Error::custom),
        }
    }
}

impl std::str::FromStr for Beta {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        if s.eq_ignore_ascii_case("auto") {
            return Ok(Beta::Auto);
        }
        s.trim()
            .parse::<f64>()
            .map(Beta::Fixed)
            .map_err(|_| format!("beta must be a number or 'auto' (got '{s}')"))
    }
}

/// Unchecked k-means settings; see each field for its default.
#[derive(Debug, Clone, PartialEq)]
pub struct KMeansParams {
    /// Number of clusters (no default; at least 1).
    pub k: usize,
    /// Every other setting of the engine (mode, β, seed, restarts, iteration limit,
    /// tolerances, refinement, annealing, split-and-merge moves), with its defaults.
    pub engine: super::EngineOptions,
    /// Use distance bounds (Hamerly 2010) to skip work; same result as plain Lloyd. Default: true.
    pub accelerate: bool,
    /// Means that must be in the result exactly (`p × dim`, in the feature units): they
    /// become the first `p` means, count toward `k`, and never move. The other means
    /// start from k-means++ around them. Annealing, the refinement ([`Self::refine`]) and
    /// split-and-merge moves are not used with pinned means. Default: none.
    pub pinned: Vec<f64>,
}

impl KMeansParams {
    /// Defaults for `k` clusters.
    pub fn new(k: usize) -> Self {
        KMeansParams {
            k,
            engine: super::EngineOptions::default(),
            accelerate: true,
            pinned: Vec::new(),
        }
    }
    pub fn mode(mut self, mode: Mode) -> Self {
        self.engine.mode = mode;
        self
    }
    pub fn beta(mut self, beta: Beta) -> Self {
        self.engine.beta = beta;
        self
    }
    pub fn seed(mut self, seed: u64) -> Self {
        self.engine.seed = seed;
        self
    }
    pub fn restarts(mut self, restarts: usize) -> Self {
        self.engine.restarts = restarts;
        self
    }
    pub fn max_iter(mut self, max_iter: usize) -> Self {
        self.engine.max_iter = max_iter;
        self
    }
    pub fn tolerance(mut self, tolerance: f64) -> Self {
        self.engine.tolerance = tolerance;
        self
    }
    pub fn shift_tolerance(mut self, shift_tolerance: f64) -> Self {
        self.engine.shift_tolerance = shift_tolerance;
        self
    }
    pub fn anneal(mut self, anneal: Option<super::Anneal>) -> Self {
        self.engine.anneal = anneal;
        self
    }
    pub fn split_merge(mut self, moves: usize) -> Self {
        self.engine.split_merge = moves;
        self
    }
    pub fn refine(mut self, refine: super::Refine) -> Self {
        self.engine.refine = refine;
        self
    }
    pub fn accelerate(mut self, accelerate: bool) -> Self {
        self.accelerate = accelerate;
        self
    }
    pub fn pinned(mut self, means: Vec<f64>) -> Self {
        self.pinned = means;
        self
    }

    /// Validates every rule; only checked parameters can be fitted.
    pub fn check(self) -> Result<ValidParams, ParamsError> {
        if self.k == 0 {
            return Err(ParamsError::KTooSmall(0));
        }
        if self.k > MAX_K {
            return Err(ParamsError::KTooLarge {
                got: self.k,
                max: MAX_K,
                why: "",
            });
        }
        self.engine.check()?;
        if self.pinned.iter().any(|v| !v.is_finite()) {
            return Err(ParamsError::BadPinned(
                "a pinned mean is not a finite number".into(),
            ));
        }
        Ok(ValidParams(self))
    }
}

/// Parameters that passed [`KMeansParams::check`].
#[derive(Debug, Clone, PartialEq)]
pub struct ValidParams(KMeansParams);

impl std::ops::Deref for ValidParams {
    type Target = KMeansParams;
    fn deref(&self) -> &KMeansParams {
        &self.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn each_rule_has_its_error() {
        assert_eq!(
            KMeansParams::new(0).check().unwrap_err(),
            ParamsError::KTooSmall(0)
        );
        assert!(matches!(
            KMeansParams::new(70_000).check(),
            Err(ParamsError::KTooLarge { .. })
        ));
        for b in [0.0, -1.0, f64::NAN, f64::INFINITY] {
            assert!(matches!(
                KMeansParams::new(3).beta(Beta::Fixed(b)).check(),
                Err(ParamsError::BadBeta(_))
            ));
        }
        assert!(matches!(
            KMeansParams::new(3).tolerance(f64::NAN).check(),
            Err(ParamsError::BadTolerance(_))
        ));
        assert!(matches!(
            KMeansParams::new(3).shift_tolerance(-1.0).check(),
            Err(ParamsError::BadShiftTolerance(_))
        ));
        assert!(matches!(
            KMeansParams::new(3).max_iter(0).check(),
            Err(ParamsError::BadMaxIter(0))
        ));
        assert!(matches!(
            KMeansParams::new(3).restarts(0).check(),
            Err(ParamsError::BadRestarts(0))
        ));
        assert!(KMeansParams::new(3)
            .refine(crate::cluster::Refine::Swap(0))
            .check()
            .is_err());
        assert!(KMeansParams::new(3).beta(Beta::Fixed(0.5)).check().is_ok());
    }

    #[test]
    fn beta_parses_auto_and_numbers() {
        assert_eq!("auto".parse::<Beta>().unwrap(), Beta::Auto);
        assert_eq!("0.25".parse::<Beta>().unwrap(), Beta::Fixed(0.25));
        assert!("sharp".parse::<Beta>().is_err());
        // NaN parses as a number and is refused by check().
        assert!(matches!("nan".parse::<Beta>().unwrap(), Beta::Fixed(b) if b.is_nan()));
    }
}
