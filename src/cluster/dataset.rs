//! Weighted rows: the engine's only input.

use crate::error::ParamsError;

/// Rows per parallel work item. Fixed, so sums never depend on the thread count.
pub(crate) const CHUNK: usize = 2048;

/// Weighted rows: `rows.len() / dim` points of `dim` f32 features each.
#[derive(Debug, Clone, Copy)]
pub struct Dataset<'a> {
    rows: &'a [f32],
    dim: usize,
    weights: Option<&'a [f64]>,
}

impl<'a> Dataset<'a> {
    /// Checks shape, finiteness and weights.
    pub fn new(
        rows: &'a [f32],
        dim: usize,
        weights: Option<&'a [f64]>,
    ) -> Result<Self, ParamsError> {
        if dim == 0 {
            return Err(ParamsError::ZeroDimension);
        }
        if rows.len() % dim != 0 {
            return Err(ParamsError::RaggedRows {
                got: rows.len(),
                dim,
            });
        }
        let n = rows.len() / dim;
        if let Some(pos) = rows.iter().position(|v| !v.is_finite()) {
            return Err(ParamsError::NonFinite {
                what: "feature",
                row: pos / dim,
            });
        }
        if let Some(w) = weights {
            if w.len() != n {
                return Err(ParamsError::WeightCount {
                    rows: n,
                    weights: w.len(),
                });
            }
            if let Some(i) = w.iter().position(|x| !(x.is_finite() && *x >= 0.0)) {
                return Err(ParamsError::BadWeight(i));
            }
        }
        Ok(Dataset { rows, dim, weights })
    }

    /// From an `n × d` ndarray view (must be in standard row-major layout).
    pub fn from_array(
        view: &'a ndarray::ArrayView2<'a, f32>,
        weights: Option<&'a [f64]>,
    ) -> Result<Self, ParamsError> {
        let dim = view.ncols();
        let rows = view.as_slice().ok_or_else(|| {
            ParamsError::Other("the array must be contiguous and row-major".into())
        })?;
        Dataset::new(rows, dim, weights)
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        self.rows.len() / self.dim
    }
    /// True when there are no rows.
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }
    /// Features per row.
    pub fn dim(&self) -> usize {
        self.dim
    }
    /// Row `i`.
    #[inline]
    pub fn row(&self, i: usize) -> &'a [f32] {
        &self.rows[i * self.dim..(i + 1) * self.dim]
    }
    /// All rows, flat.
    pub fn rows(&self) -> &'a [f32] {
        self.rows
    }
    /// Weight of row `i` (1 when unweighted).
    #[inline]
    pub fn weight(&self, i: usize) -> f64 {
        self.weights.map_or(1.0, |w| w[i])
    }
    /// Sum of weights.
    pub fn total_weight(&self) -> f64 {
        self.weights.map_or(self.len() as f64, |w| w.iter().sum())
    }
}
