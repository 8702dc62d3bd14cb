//! Colour spaces (sRGB, CIELAB, OKLab) and colour difference (CIE76, CIEDE2000).
//!
//! sRGB follows IEC 61966-2-1; CIELAB follows CIE 15:2004 with the D65 white.
//! The `palette` crate is the reference implementation: the conversion matrices
//! here are read from it once, and the fast path (transfer-function lookup tables,
//! applied once per distinct colour) is tested to agree with it.

pub mod adapt;
pub mod delta_e;
pub mod inks;
pub mod profile;
pub mod table;

use palette::{FromColor, IntoColor, Lab, LinSrgb, Oklab, Srgb, Xyz};
use std::sync::OnceLock;

pub use delta_e::{delta_e2000, delta_e76};

/// The space colours are clustered in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Space {
    /// CIELAB, D65 white; one unit is one ΔE*ab. Soft-assignment beta is in 1/ΔE*ab².
    Cielab,
    /// OKLab (Ottosson 2020); L runs 0..1, so beta is in 1/(OKLab unit)², about 10⁴ times
    /// the CIELAB value for the same sharpness.
    Oklab,
}

impl Space {
    /// The lowercase name used on the command line and in documents.
    pub fn name(self) -> &'static str {
        match self {
            Space::Cielab => "cielab",
            Space::Oklab => "oklab",
        }
    }
}

impl std::str::FromStr for Space {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s.to_ascii_lowercase().as_str() {
            "cielab" | "lab" => Ok(Space::Cielab),
            "oklab" => Ok(Space::Oklab),
            _ => Err(format!("unknown colour space '{s}' (use cielab or oklab)")),
        }
    }
}

/// A 3 × 3 matrix, rows first.
pub type Mat3 = [[f64; 3]; 3];

struct Tables {
    lin8: [f64; 256],
    lin16: Vec<f64>,
    rgb_to_xyz: Mat3,
    rgb_to_lms: Mat3,
    lms_to_oklab: Mat3,
    white: [f64; 3],
}

/// IEC 61966-2-1 decoding (transfer function), value in 0..1.
pub fn srgb_to_linear(v: f64) -> f64 {
    if v <= 0.04045 {
        v / 12.92
    } else {
        ((v + 0.055) / 1.055).powf(2.4)
    }
}

/// IEC 61966-2-1 encoding, value in 0..1.
pub fn linear_to_srgb(v: f64) -> f64 {
    if v <= 0.0031308 {
        v * 12.92
    } else {
        1.055 * v.powf(1.0 / 2.4) - 0.055
    }
}

/// Matrix times column vector.
pub fn mul(m: &Mat3, v: [f64; 3]) -> [f64; 3] {
    [
        m[0][0] * v[0] + m[0][1] * v[1] + m[0][2] * v[2],
        m[1][0] * v[0] + m[1][1] * v[1] + m[1][2] * v[2],
        m[2][0] * v[0] + m[2][1] * v[1] + m[2][2] * v[2],
    ]
}

fn tables() -> &'static Tables {
    static T: OnceLock<Tables> = OnceLock::new();
    T.get_or_init(|| {
        let mut lin8 = [0.0; 256];
        for (i, v) in lin8.iter_mut().enumerate() {
            *v = srgb_to_linear(i as f64 / 255.0);
        }
        let lin16 = (0..65536u32)
            .map(|i| srgb_to_linear(i as f64 / 65535.0))
            .collect();
        // Read the matrices from the reference implementation: images of the unit vectors.
        let mut rgb_to_xyz = [[0.0; 3]; 3];
        for j in 0..3 {
            let mut e = [0.0f64; 3];
            e[j] = 1.0;
            let xyz: Xyz<palette::white_point::D65, f64> =
                LinSrgb::new(e[0], e[1], e[2]).into_color();
            rgb_to_xyz[0][j] = xyz.x;
            rgb_to_xyz[1][j] = xyz.y;
            rgb_to_xyz[2][j] = xyz.z;
        }
        // OKLab (Ottosson 2020): lms = M1 · linear sRGB, lab = M2 · cbrt(lms), with the
        // published direct sRGB matrix, as `palette` uses for sRGB input.
        let m1: Mat3 = [
            [0.4122214708, 0.5363325363, 0.0514459929],
            [0.2119034982, 0.6806995451, 0.1073969566],
            [0.0883024619, 0.2817188376, 0.6299787005],
        ];
        let m2: Mat3 = [
            [0.2104542553, 0.7936177850, -0.0040720468],
            [1.9779984951, -2.4285922050, 0.4505937099],
            [0.0259040371, 0.7827717662, -0.8086757660],
        ];
        Tables {
            lin8,
            lin16,
            rgb_to_lms: m1,
            rgb_to_xyz,
            lms_to_oklab: m2,
            // The D65 white as `palette` uses it (CIE 15:2004 tabulated values).
            white: [0.95047, 1.0, 1.08883],
        }
    })
}

fn lab_f(t: f64) -> f64 {
    const E: f64 = 216.0 / 24389.0;
    const K: f64 = 24389.0 / 27.0;
    if t > E {
        t.cbrt()
    } else {
        (K * t + 16.0) / 116.0
    }
}

/// Linear sRGB (0..1) to CIE XYZ (D65, Y = 1 for white).
pub fn linear_to_xyz(rgb: [f64; 3]) -> [f64; 3] {
    mul(&tables().rgb_to_xyz, rgb)
}

/// The sRGB → XYZ (D65) matrix in use (read from `palette`).
pub fn rgb_to_xyz_matrix() -> Mat3 {
    tables().rgb_to_xyz
}

/// The D65 white used for CIELAB (CIE 15:2004 table values, as in `palette`).
pub fn d65_white() -> [f64; 3] {
    tables().white
}

/// CIE XYZ to CIELAB relative to `white` (CIE 15:2004).
pub fn xyz_to_lab(xyz: [f64; 3], white: [f64; 3]) -> [f64; 3] {
    let fx = lab_f(xyz[0] / white[0]);
    let fy = lab_f(xyz[1] / white[1]);
    let fz = lab_f(xyz[2] / white[2]);
    [116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)]
}

/// CIELAB relative to `white` back to CIE XYZ (CIE 15:2004).
pub fn lab_to_xyz(lab: [f64; 3], white: [f64; 3]) -> [f64; 3] {
    const E: f64 = 216.0 / 24389.0;
    const K: f64 = 24389.0 / 27.0;
    let fy = (lab[0] + 16.0) / 116.0;
    let fx = fy + lab[1] / 500.0;
    let fz = fy - lab[2] / 200.0;
    let inv = |f: f64| {
        if f * f * f > E {
            f * f * f
        } else {
            (116.0 * f - 16.0) / K
        }
    };
    let yr = if lab[0] > K * E {
        fy * fy * fy
    } else {
        lab[0] / K
    };
    [inv(fx) * white[0], yr * white[1], inv(fz) * white[2]]
}

/// Linear sRGB (0..1) to CIELAB (D65).
pub fn linear_to_lab(rgb: [f64; 3]) -> [f64; 3] {
    let t = tables();
    xyz_to_lab(mul(&t.rgb_to_xyz, rgb), t.white)
}

/// Linear sRGB (0..1) to OKLab.
pub fn linear_to_oklab(rgb: [f64; 3]) -> [f64; 3] {
    let t = tables();
    let lms = mul(&t.rgb_to_lms, rgb);
    mul(
        &t.lms_to_oklab,
        [lms[0].cbrt(), lms[1].cbrt(), lms[2].cbrt()],
    )
}

/// Decodes 8-bit sRGB to linear RGB through the lookup table.
pub fn srgb8_to_linear(c: [u8; 3]) -> [f64; 3] {
    let t = tables();
    [
        t.lin8[c[0] as usize],
        t.lin8[c[1] as usize],
        t.lin8[c[2] as usize],
    ]
}

/// Decodes 16-bit sRGB to linear RGB through the lookup table.
pub fn srgb16_to_linear(c: [u16; 3]) -> [f64; 3] {
    let t = tables();
    [
        t.lin16[c[0] as usize],
        t.lin16[c[1] as usize],
        t.lin16[c[2] as usize],
    ]
}

/// 8-bit sRGB to CIELAB (D65).
pub fn srgb8_to_lab(c: [u8; 3]) -> [f64; 3] {
    linear_to_lab(srgb8_to_linear(c))
}

/// 8-bit sRGB to OKLab.
pub fn srgb8_to_oklab(c: [u8; 3]) -> [f64; 3] {
    linear_to_oklab(srgb8_to_linear(c))
}

/// Linear sRGB into the given space.
pub fn linear_to_space(rgb: [f64; 3], space: Space) -> [f64; 3] {
    match space {
        Space::Cielab => linear_to_lab(rgb),
        Space::Oklab => linear_to_oklab(rgb),
    }
}

/// A point of `space` back to linear sRGB (not clipped).
pub fn space_to_linear(v: [f64; 3], space: Space) -> [f64; 3] {
    let lin: LinSrgb<f64> = match space {
        Space::Cielab => {
            LinSrgb::from_color(Lab::<palette::white_point::D65, f64>::new(v[0], v[1], v[2]))
        }
        Space::Oklab => LinSrgb::from_color(Oklab::<f64>::new(v[0], v[1], v[2])),
    };
    [lin.red, lin.green, lin.blue]
}

/// Linear sRGB to 8-bit sRGB, clipping each channel to the gamut.
pub fn linear_to_srgb8(rgb: [f64; 3]) -> [u8; 3] {
    let enc = |v: f64| {
        let v = if v.is_finite() {
            v.clamp(0.0, 1.0)
        } else {
            0.0
        };
        (linear_to_srgb(v) * 255.0).round().clamp(0.0, 255.0) as u8
    };
    [enc(rgb[0]), enc(rgb[1]), enc(rgb[2])]
}

/// A point of `space` to 8-bit sRGB with per-channel gamut clipping.
pub fn space_to_srgb8(v: [f64; 3], space: Space) -> [u8; 3] {
    linear_to_srgb8(space_to_linear(v, space))
}

/// `#rrggbb` for an 8-bit sRGB colour.
pub fn hex(c: [u8; 3]) -> String {
    format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2])
}

/// Parses `#rrggbb` or `rrggbb`.
pub fn parse_hex(s: &str) -> Result<[u8; 3], String> {
    let t = s.trim().trim_start_matches('#');
    if t.len() != 6 || !t.chars().all(|c| c.is_ascii_hexdigit()) {
        return Err(format!("'{s}' is not a colour of the form #rrggbb"));
    }
    let v = u32::from_str_radix(t, 16).map_err(|e| e.to_string())?;
    Ok([(v >> 16) as u8, (v >> 8) as u8, v as u8])
}

/// The `palette` crate's own CIELAB for an 8-bit sRGB colour (reference path, slow).
pub fn reference_srgb8_to_lab(c: [u8; 3]) -> [f64; 3] {
    let lab: Lab<palette::white_point::D65, f64> = Srgb::new(c[0], c[1], c[2])
        .into_format::<f64>()
        .into_color();
    [lab.l, lab.a, lab.b]
}

/// The `palette` crate's own OKLab for an 8-bit sRGB colour (reference path, slow).
pub fn reference_srgb8_to_oklab(c: [u8; 3]) -> [f64; 3] {
    let ok: Oklab<f64> = Srgb::new(c[0], c[1], c[2])
        .into_format::<f64>()
        .into_color();
    [ok.l, ok.a, ok.b]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fast_path_agrees_with_palette_for_every_grey_and_a_lattice() {
        // Every 8-bit value on each axis, plus a 16-step lattice of the cube.
        let mut worst = 0.0f64;
        let mut worst_ok = 0.0f64;
        let mut check = |c: [u8; 3]| {
            let a = srgb8_to_lab(c);
            let b = reference_srgb8_to_lab(c);
            worst = worst.max(delta_e76(a, b));
            let a = srgb8_to_oklab(c);
            let b = reference_srgb8_to_oklab(c);
            worst_ok = worst_ok.max(delta_e76(a, b));
        };
        for v in 0..=255u8 {
            check([v, v, v]);
            check([v, 0, 0]);
            check([0, v, 0]);
            check([0, 0, v]);
        }
        for r in (0..=255u32).step_by(17) {
            for g in (0..=255u32).step_by(17) {
                for b in (0..=255u32).step_by(17) {
                    check([r as u8, g as u8, b as u8]);
                }
            }
        }
        assert!(
            worst < 0.001,
            "CIELAB fast path differs from palette by {worst} ΔE*ab"
        );
        assert!(
            worst_ok < 1e-5,
            "OKLab fast path differs from palette by {worst_ok}"
        );
    }

    #[test]
    fn round_trip_srgb8_through_both_spaces() {
        for r in (0..=255u32).step_by(5) {
            for g in (0..=255u32).step_by(5) {
                for b in (0..=255u32).step_by(5) {
                    let c = [r as u8, g as u8, b as u8];
                    assert_eq!(space_to_srgb8(srgb8_to_lab(c).map(|x| x), Space::Cielab), c);
                    assert_eq!(space_to_srgb8(srgb8_to_oklab(c), Space::Oklab), c);
                }
            }
        }
    }

    #[test]
    fn out_of_gamut_is_clipped() {
        // A CIELAB point far outside sRGB: saturated beyond the red primary.
        let c = space_to_srgb8([50.0, 120.0, 90.0], Space::Cielab);
        assert_eq!(c[0], 255);
        assert_eq!(
            space_to_srgb8([150.0, 0.0, 0.0], Space::Cielab),
            [255, 255, 255]
        );
        assert_eq!(space_to_srgb8([-5.0, 0.0, 0.0], Space::Cielab), [0, 0, 0]);
    }

    #[test]
    fn hex_round_trip() {
        assert_eq!(hex([255, 0, 16]), "#ff0010");
        assert_eq!(parse_hex("#ff0010").unwrap(), [255, 0, 16]);
        assert_eq!(parse_hex("A0b1C2").unwrap(), [0xa0, 0xb1, 0xc2]);
        assert!(parse_hex("#ff00").is_err());
        assert!(parse_hex("#gg0000").is_err());
    }
}
