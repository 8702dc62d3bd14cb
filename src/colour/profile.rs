//! Embedded ICC profiles: what an image's RGB numbers mean.
//!
//! Profiles are parsed by `moxcms` (the colour-management crate the `image` crate itself
//! uses). RGB matrix/TRC profiles (ICC.1:2022 F.3: the colorant tags times the linearised
//! values give the D50 connection space) and grey TRC profiles are used exactly: each entry
//! is linearised by the profile's curves and taken through the connection space to linear
//! sRGB, unbounded, so colours outside sRGB keep their CIELAB. Both profiles' colorants are
//! D50-adapted, so the path is that of a relative-colorimetric transform between them (what
//! LittleCMS does for two matrix/TRC profiles). Other profiles (lookup-table RGB, CMYK, Lab)
//! are not applied: the image is read as sRGB, with a note.

use moxcms::{ColorProfile, DataColorSpace, ProfileText, ToneReprCurve};
use std::sync::Arc;

/// How to read an image's RGB numbers.
#[derive(Debug, Clone, PartialEq)]
pub struct SourceProfile {
    /// The profile's description, or `embedded ICC profile`.
    pub description: String,
    /// The profile as embedded (written again with the reduced image).
    pub icc: Vec<u8>,
    /// Source linear RGB → linear sRGB.
    to_srgb: [[f64; 3]; 3],
    /// Linear sRGB → source linear RGB.
    from_srgb: [[f64; 3]; 3],
    /// The red, green and blue curves (all three the grey curve for a grey profile).
    curves: [ToneReprCurve; 3],
}

/// What an embedded profile turned out to be.
#[derive(Debug, Clone, PartialEq)]
pub enum ProfileUse {
    /// sRGB or a profile that matches it (within 1e-3 in the matrix and half an 8-bit
    /// step along the curves): the fast sRGB path applies.
    Srgb(String),
    /// A profile the colours are converted through.
    Convert(Arc<SourceProfile>),
    /// A profile that cannot be applied (why); the image is read as sRGB.
    Unused(String),
}

fn text(t: &Option<ProfileText>) -> Option<String> {
    match t.as_ref()? {
        ProfileText::PlainString(s) => Some(s.clone()),
        ProfileText::Localizable(v) => v.first().map(|l| l.value.clone()),
        ProfileText::Description(d) => Some(d.ascii_string.clone()),
    }
    .map(|s| s.trim_matches(char::from(0)).trim().to_string())
    .filter(|s| !s.is_empty())
}

fn mat(m: moxcms::Matrix3d) -> [[f64; 3]; 3] {
    m.v
}

fn mul(a: [[f64; 3]; 3], b: [[f64; 3]; 3]) -> [[f64; 3]; 3] {
    let mut o = [[0.0; 3]; 3];
    for i in 0..3 {
        for j in 0..3 {
            o[i][j] = (0..3).map(|k| a[i][k] * b[k][j]).sum();
        }
    }
    o
}

fn inverse(m: [[f64; 3]; 3]) -> Option<[[f64; 3]; 3]> {
    let det = m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
        - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
        + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0]);
    if !det.is_finite() || det.abs() < 1e-12 {
        return None;
    }
    let c =
        |r0: usize, c0: usize, r1: usize, c1: usize| m[r0][c0] * m[r1][c1] - m[r0][c1] * m[r1][c0];
    Some([
        [
            c(1, 1, 2, 2) / det,
            -c(0, 1, 2, 2) / det,
            c(0, 1, 1, 2) / det,
        ],
        [
            -c(1, 0, 2, 2) / det,
            c(0, 0, 2, 2) / det,
            -c(0, 0, 1, 2) / det,
        ],
        [
            c(1, 0, 2, 1) / det,
            -c(0, 0, 2, 1) / det,
            c(0, 0, 1, 1) / det,
        ],
    ])
}

fn apply(m: &[[f64; 3]; 3], v: [f64; 3]) -> [f64; 3] {
    [0, 1, 2].map(|i| m[i][0] * v[0] + m[i][1] * v[1] + m[i][2] * v[2])
}

/// Is this ICC profile's data colour space RGB (header bytes 16..20, ICC.1 7.2.6)? Only
/// such a profile may be embedded in an RGB or indexed PNG (PNG 1.2, iCCP).
pub fn is_rgb_profile(icc: &[u8]) -> bool {
    icc.get(16..20) == Some(b"RGB ")
}

/// Reads an embedded profile.
pub fn read_profile(icc: &[u8]) -> ProfileUse {
    let p = match ColorProfile::new_from_slice(icc) {
        Ok(p) => p,
        Err(e) => {
            return ProfileUse::Unused(format!("the embedded ICC profile cannot be read ({e})"))
        }
    };
    let description = text(&p.description).unwrap_or_else(|| "embedded ICC profile".into());
    let srgb = ColorProfile::new_srgb();
    let srgb_m = mat(srgb.rgb_to_xyz_matrix());
    let Some(srgb_inv) = inverse(srgb_m) else {
        return ProfileUse::Unused("sRGB matrix".into());
    };
    let (to_srgb, curves) = match p.color_space {
        DataColorSpace::Rgb if p.is_matrix_shaper() => (
            mul(srgb_inv, mat(p.rgb_to_xyz_matrix())),
            [
                p.red_trc.clone().unwrap(),
                p.green_trc.clone().unwrap(),
                p.blue_trc.clone().unwrap(),
            ],
        ),
        DataColorSpace::Gray if p.gray_trc.is_some() => {
            let g = p.gray_trc.clone().unwrap();
            (
                [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]],
                [g.clone(), g.clone(), g],
            )
        }
        other => {
            return ProfileUse::Unused(format!(
                "the embedded ICC profile '{description}' ({other:?}, not a matrix/TRC RGB or \
                 grey profile) is not applied"
            ))
        }
    };
    let Some(from_srgb) = inverse(to_srgb) else {
        return ProfileUse::Unused(format!(
            "the embedded ICC profile '{description}' has a singular colorant matrix"
        ));
    };
    let sp = SourceProfile {
        description: description.clone(),
        icc: icc.to_vec(),
        to_srgb,
        from_srgb,
        curves,
    };
    let Some(lin) = sp.linearisers() else {
        return ProfileUse::Unused(format!(
            "the tone curves of the embedded ICC profile '{description}' cannot be evaluated"
        ));
    };
    // Matches sRGB? Then the exact sRGB path applies.
    let id = (0..3).all(|i| (0..3).all(|j| (to_srgb[i][j] - (i == j) as u8 as f64).abs() < 1e-3));
    let curve_ok = (0..=255u8).all(|v| {
        let x = v as f32 / 255.0;
        let want = crate::colour::srgb_to_linear(x as f64);
        (0..3).all(|c| {
            let got = lin[c].evaluate_value(x) as f64;
            (crate::colour::linear_to_srgb(got) - crate::colour::linear_to_srgb(want)).abs()
                < 0.5 / 255.0
        })
    });
    if id && curve_ok && p.color_space == DataColorSpace::Rgb {
        ProfileUse::Srgb(description)
    } else {
        ProfileUse::Convert(Arc::new(sp))
    }
}

type Evaluator = Box<dyn moxcms::ToneCurveEvaluator + Send + Sync>;

impl SourceProfile {
    fn linearisers(&self) -> Option<[Evaluator; 3]> {
        let [r, g, b] = &self.curves;
        Some([
            r.make_linear_evaluator().ok()?,
            g.make_linear_evaluator().ok()?,
            b.make_linear_evaluator().ok()?,
        ])
    }

    /// A converter from this profile's RGB numbers to linear sRGB.
    pub fn to_linear(&self) -> ToLinear<'_> {
        ToLinear {
            profile: self,
            curves: self.linearisers().expect("checked when read"),
        }
    }

    /// 8-bit sRGB colours as 8-bit numbers of this profile (each clipped to its gamut).
    pub fn encode_srgb8(&self, colours: &[[u8; 3]]) -> Option<Vec<[u8; 3]>> {
        let inv: Vec<Evaluator> = self
            .curves
            .iter()
            .map(|c| inverse_curve(c)?.make_linear_evaluator().ok())
            .collect::<Option<_>>()?;
        Some(
            colours
                .iter()
                .map(|&c| {
                    let src = apply(&self.from_srgb, crate::colour::srgb8_to_linear(c));
                    [0, 1, 2].map(|k| {
                        let v = inv[k].evaluate_value(src[k].clamp(0.0, 1.0) as f32);
                        (v.clamp(0.0, 1.0) * 255.0).round() as u8
                    })
                })
                .collect(),
        )
    }
}

/// The inverse of a tone curve. A `curv` tag with no entry is the identity and one with a
/// single entry is a pure gamma in u8Fixed8Number (ICC.1:2010 §10.6); moxcms inverts
/// every table by resampling it, which turns those two into nonsense, so they are
/// inverted here (type-0 parametric curve Y = X^(1/γ)). Other curves go to moxcms.
fn inverse_curve(c: &ToneReprCurve) -> Option<ToneReprCurve> {
    match c {
        ToneReprCurve::Lut(t) if t.is_empty() => Some(ToneReprCurve::Lut(Vec::new())),
        ToneReprCurve::Lut(t) if t.len() == 1 => {
            let gamma = t[0] as f32 / 256.0;
            (gamma > 0.0).then(|| ToneReprCurve::Parametric(vec![1.0 / gamma]))
        }
        other => other.inverse().ok(),
    }
}

/// Converts RGB numbers of one profile to unbounded linear sRGB.
pub struct ToLinear<'a> {
    profile: &'a SourceProfile,
    curves: [Evaluator; 3],
}

impl ToLinear<'_> {
    /// Linear sRGB of RGB numbers in 0..1.
    pub fn linear(&self, rgb: [f64; 3]) -> [f64; 3] {
        let lin = [0, 1, 2].map(|c| self.curves[c].evaluate_value(rgb[c] as f32) as f64);
        apply(&self.profile.to_srgb, lin)
    }
}
