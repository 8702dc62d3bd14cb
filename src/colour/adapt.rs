//! Chromatic adaptation between the sRGB (D65) and graphic-arts (D50) whites with the
//! Bradford transform (Lam 1985, as published in the ICC specification, ICC.1 Annex E).

use super::{linear_to_srgb8, linear_to_xyz, mul, rgb_to_xyz_matrix, xyz_to_lab, Mat3};

/// Bradford cone-response matrix (Lam 1985; ICC.1 Annex E).
pub const BRADFORD: Mat3 = [
    [0.8951, 0.2664, -0.1614],
    [-0.7502, 1.7135, 0.0367],
    [0.0389, -0.0685, 1.0296],
];

/// The ICC profile connection space white, D50 (X 0.9642, Y 1.0, Z 0.8249), used for
/// measured ink values (ISO 13655 convention).
pub const D50_ICC: [f64; 3] = [0.9642, 1.0, 0.8249];

/// Inverse of a 3 × 3 matrix (cofactors); the matrices here are well conditioned.
pub fn invert(m: &Mat3) -> Mat3 {
    let det = m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
        - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
        + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0]);
    let c = |a: usize, b: usize, c: usize, d: usize| m[a][b] * m[c][d];
    [
        [
            (c(1, 1, 2, 2) - c(1, 2, 2, 1)) / det,
            (c(0, 2, 2, 1) - c(0, 1, 2, 2)) / det,
            (c(0, 1, 1, 2) - c(0, 2, 1, 1)) / det,
        ],
        [
            (c(1, 2, 2, 0) - c(1, 0, 2, 2)) / det,
            (c(0, 0, 2, 2) - c(0, 2, 2, 0)) / det,
            (c(0, 2, 1, 0) - c(0, 0, 1, 2)) / det,
        ],
        [
            (c(1, 0, 2, 1) - c(1, 1, 2, 0)) / det,
            (c(0, 1, 2, 0) - c(0, 0, 2, 1)) / det,
            (c(0, 0, 1, 1) - c(0, 1, 1, 0)) / det,
        ],
    ]
}

fn matmul(a: &Mat3, b: &Mat3) -> Mat3 {
    let mut out = [[0.0; 3]; 3];
    for (i, row) in out.iter_mut().enumerate() {
        for (j, v) in row.iter_mut().enumerate() {
            *v = (0..3).map(|k| a[i][k] * b[k][j]).sum();
        }
    }
    out
}

/// Bradford adaptation matrix taking XYZ seen under `src` white to `dst` white:
/// M⁻¹ · diag(ρ_dst / ρ_src) · M, with M the Bradford cone matrix.
pub fn bradford_matrix(src: [f64; 3], dst: [f64; 3]) -> Mat3 {
    let s = mul(&BRADFORD, src);
    let d = mul(&BRADFORD, dst);
    let scale: Mat3 = [
        [d[0] / s[0], 0.0, 0.0],
        [0.0, d[1] / s[1], 0.0],
        [0.0, 0.0, d[2] / s[2]],
    ];
    matmul(&invert(&BRADFORD), &matmul(&scale, &BRADFORD))
}

/// The white of the sRGB encoding (XYZ of RGB = 1, 1, 1) with the matrix in use.
pub fn srgb_white() -> [f64; 3] {
    linear_to_xyz([1.0, 1.0, 1.0])
}

fn d65_to_d50() -> &'static (Mat3, Mat3) {
    static M: std::sync::OnceLock<(Mat3, Mat3)> = std::sync::OnceLock::new();
    M.get_or_init(|| {
        let fwd = bradford_matrix(srgb_white(), D50_ICC);
        (fwd, invert(&fwd))
    })
}

/// Linear sRGB to CIELAB relative to the D50 ICC white, adapted with Bradford, so that
/// sRGB white maps to L* = 100, a* = b* = 0.
pub fn linear_to_lab_d50(rgb: [f64; 3]) -> [f64; 3] {
    xyz_to_lab(mul(&d65_to_d50().0, linear_to_xyz(rgb)), D50_ICC)
}

/// 8-bit sRGB to CIELAB D50.
pub fn srgb8_to_lab_d50(c: [u8; 3]) -> [f64; 3] {
    linear_to_lab_d50(super::srgb8_to_linear(c))
}

/// CIELAB D50 to linear sRGB (not clipped).
pub fn lab_d50_to_linear(lab: [f64; 3]) -> [f64; 3] {
    let xyz65 = mul(&d65_to_d50().1, super::lab_to_xyz(lab, D50_ICC));
    mul(&invert(&rgb_to_xyz_matrix()), xyz65)
}

/// CIELAB D50 to 8-bit sRGB with per-channel gamut clipping (for display and proofs).
pub fn lab_d50_to_srgb8(lab: [f64; 3]) -> [u8; 3] {
    linear_to_srgb8(lab_d50_to_linear(lab))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn inverse_is_inverse() {
        let m = invert(&BRADFORD);
        let id = matmul(&m, &BRADFORD);
        for (i, row) in id.iter().enumerate() {
            for (j, v) in row.iter().enumerate() {
                assert!((v - if i == j { 1.0 } else { 0.0 }).abs() < 1e-12);
            }
        }
    }

    #[test]
    fn white_maps_to_white_and_round_trips() {
        let w = srgb8_to_lab_d50([255, 255, 255]);
        assert!(
            (w[0] - 100.0).abs() < 1e-9 && w[1].abs() < 1e-9 && w[2].abs() < 1e-9,
            "{w:?}"
        );
        for c in [[255u8, 0, 0], [0, 128, 64], [12, 34, 250], [200, 200, 10]] {
            assert_eq!(lab_d50_to_srgb8(srgb8_to_lab_d50(c)), c);
        }
    }
}
