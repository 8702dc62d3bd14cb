//! One clustering engine over plain weighted rows: k-means++ seeding, hard Lloyd
//! iterations (optionally with Hamerly distance bounds), soft k-means, and Gaussian mixtures
//! with a full covariance per component (EM started from k-means).
//!
//! The engine knows nothing about images or colour: it sees `n × d` f32 rows and
//! a weight per row. Weighted rows are exact stand-ins for repeated rows, so a
//! histogram of distinct values gives the same optimisation as every pixel.
//!
//! Determinism: work is split into fixed-size chunks whatever the thread count,
//! and per-chunk partial sums are reduced in chunk order.

mod anneal;
mod bounds;
mod choose;
mod dataset;
mod engine;
mod grid;
mod hard;
mod init;
mod mixture;
mod model;
mod nearest;
mod params;
mod refine;
mod soft;
mod split_merge;

pub use anneal::{anneal, Anneal, AnnealResult};
pub use choose::{
    adjusted_rand_index, bic, calibration, k_path, silhouette, stability, weighted_sample,
    CalibrationBin, KPath,
};
pub use engine::EngineOptions;
pub use hard::{assign_nearest, lloyd, lloyd_fixed, LloydResult, Stop};
pub use init::{kmeans_plus_plus, kmeans_plus_plus_from};
pub use mixture::{fit_mixture, free_parameters, Mixture, MixtureSettings};
pub use model::{finish, fit, fit_from, fit_hard, stop_rule, KMeansModel};
pub use params::{Beta, KMeansParams, Mode, ValidParams, MAX_K};
pub use refine::{
    refine_means, Refine, Refined, DEFAULT_RANDOM_SWAP_TRIALS, DEFAULT_SPLIT_MERGE_MOVES,
    DEFAULT_SWAP_TRIALS, MAX_REFINE,
};
pub use soft::{
    auto_beta, responsibility_matrix, soft_assign, soft_kmeans, soft_kmeans_fixed, SoftAssignment,
    SoftResult,
};
pub use split_merge::{split_merge, SplitMerge};

pub use dataset::Dataset;
pub(crate) use dataset::CHUNK;
pub use nearest::nearest_two;
pub(crate) use nearest::{dist2, nearest_two_by_dim, MeansByDim};

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Rng;

    #[test]
    fn means_by_dim_give_exactly_the_row_layout_results() {
        let mut r = Rng::new(11, 0);
        for dim in 1..=10 {
            for k in [1, 2, 7, 8, 9, 16, 17, 40] {
                let means: Vec<f32> = (0..k * dim)
                    .map(|_| (r.uniform() * 200.0 - 100.0) as f32)
                    .collect();
                let by_dim = MeansByDim::new(&means, dim);
                for _ in 0..200 {
                    let x: Vec<f32> = (0..dim)
                        .map(|_| (r.uniform() * 240.0 - 120.0) as f32)
                        .collect();
                    let a = nearest_two(&x, &means, dim);
                    let b = nearest_two_by_dim(&x, &by_dim);
                    assert_eq!(a.0, b.0, "dim {dim} k {k}");
                    assert_eq!(a.1.to_bits(), b.1.to_bits());
                    assert_eq!(a.2.to_bits(), b.2.to_bits());
                }
                // A row equal to a mean, and ties between equal means: lowest index wins.
                let mut twice = means.clone();
                twice.extend_from_slice(&means[..dim]);
                let by_dim = MeansByDim::new(&twice, dim);
                let x = &means[..dim];
                assert_eq!(nearest_two(x, &twice, dim), nearest_two_by_dim(x, &by_dim));
                assert_eq!(nearest_two_by_dim(x, &by_dim).0, 0);
            }
        }
    }

    #[test]
    fn ties_across_lanes_resolve_to_the_lowest_index() {
        // Means on a coarse integer grid and rows on it too: many exactly equal
        // distances, spread over different lanes and blocks.
        let mut r = Rng::new(5, 0);
        for dim in 1..=4 {
            for k in [3, 5, 8, 13, 16, 33] {
                let means: Vec<f32> = (0..k * dim).map(|_| (r.below(3) as f32) - 1.0).collect();
                let by_dim = MeansByDim::new(&means, dim);
                for _ in 0..300 {
                    let x: Vec<f32> = (0..dim).map(|_| (r.below(5) as f32) - 2.0).collect();
                    let a = nearest_two(&x, &means, dim);
                    let b = nearest_two_by_dim(&x, &by_dim);
                    assert_eq!(a.0, b.0, "dim {dim} k {k} x {x:?}");
                    assert_eq!(a.1.to_bits(), b.1.to_bits());
                    assert_eq!(a.2.to_bits(), b.2.to_bits());
                }
            }
        }
    }
}
