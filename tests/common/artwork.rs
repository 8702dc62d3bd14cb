//! Synthetic poster artwork with known colour families, for checks that small, distinct
//! colours survive colour reduction (issue #20). Each poster is drawn from fixed parameters:
//! a few large areas (one with a gentle gradient) under print grain, and a few small
//! shapes in their own colours (0.1–1 % of the picture each). The grain and the text-like
//! dots come from a seeded SplitMix64 generator written here, and the pixel values use
//! only additions, multiplications, divisions and rounding, so every call gives the same
//! bytes on every platform.
//!
//! Use from an integration test with `#[path = "common/artwork.rs"] mod artwork;`
//! (from an example: `#[path = "../tests/common/artwork.rs"] mod artwork;`).
//! `examples/make_artwork.rs` writes the set to `fixtures/families/`.
#![allow(dead_code)]

use image::codecs::jpeg::JpegEncoder;
use image::codecs::png::{CompressionType, FilterType, PngEncoder};
use image::{ExtendedColorType, ImageEncoder};

/// One colour family of a poster: a large area or a small shape.
pub struct Family {
    /// Name within the poster, e.g. `red-disc`.
    pub name: String,
    /// Nominal colour (for the gradient area: the colour at the middle of the gradient).
    pub srgb: [u8; 3],
    /// CIELAB (D65, 2°) mean of the family's pixels in `Artwork::rgb` (grain, gradient and
    /// anti-aliased edge pixels included).
    pub lab: [f64; 3],
    /// Pixels whose largest coverage (of 4×4 sub-samples) is this family (a tie goes to
    /// the layer underneath).
    pub pixels: u64,
    /// True for the small shapes (0.1–1 % of the picture each).
    pub small: bool,
}

/// One poster: 8-bit sRGB pixels, row-major, 3 bytes a pixel.
pub struct Artwork {
    pub name: String,
    /// Number of colour families (= `families.len()`).
    pub k: usize,
    pub width: u32,
    pub height: u32,
    pub rgb: Vec<u8>,
    pub families: Vec<Family>,
}

// ---------------------------------------------------------------------------------------
// Seeded generator

/// SplitMix64 (Steele, Lea & Flood 2014), as used to seed xoshiro generators.
struct SplitMix64(u64);

impl SplitMix64 {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in [0, 1) with 53 random bits.
    fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / 9_007_199_254_740_992.0)
    }
    /// About standard normal: the sum of 12 uniforms less 6 (mean 0, variance 1). Only
    /// additions, so it is the same on every platform (no library logarithm or cosine).
    fn normal(&mut self) -> f64 {
        let mut s = 0.0;
        for _ in 0..12 {
            s += self.uniform();
        }
        s - 6.0
    }
}

/// FNV-1a hash of a name: the per-poster seed.
fn seed_of(name: &str) -> u64 {
    let mut h: u64 = 0xCBF2_9CE4_8422_2325;
    for b in name.bytes() {
        h ^= b as u64;
        h = h.wrapping_mul(0x0000_0100_0000_01B3);
    }
    h
}

// ---------------------------------------------------------------------------------------
// Colour: sRGB (IEC 61966-2-1) -> XYZ -> CIELAB (CIE 15:2004, D65 2°), CIEDE2000

/// D65 white, CIE 15:2004 table values (X, Y, Z with Y = 1).
const D65: [f64; 3] = [0.950_47, 1.0, 1.088_83];

/// sRGB transfer function decoded, 0..1 -> linear 0..1 (IEC 61966-2-1).
fn srgb_decode(v: f64) -> f64 {
    if v <= 0.040_45 {
        v / 12.92
    } else {
        ((v + 0.055) / 1.055).powf(2.4)
    }
}

/// sRGB given as 0..255 floats (need not be integers) to CIELAB D65.
pub fn srgb_to_lab(c: [f64; 3]) -> [f64; 3] {
    let [r, g, b] = c.map(|v| srgb_decode(v / 255.0));
    linear_to_lab([r, g, b])
}

/// 8-bit sRGB to CIELAB D65.
pub fn srgb8_to_lab(c: [u8; 3]) -> [f64; 3] {
    srgb_to_lab(c.map(f64::from))
}

/// Linear sRGB to CIELAB D65, with the IEC 61966-2-1 RGB -> XYZ matrix.
fn linear_to_lab([r, g, b]: [f64; 3]) -> [f64; 3] {
    let x = 0.4124 * r + 0.3576 * g + 0.1805 * b;
    let y = 0.2126 * r + 0.7152 * g + 0.0722 * b;
    let z = 0.0193 * r + 0.1192 * g + 0.9505 * b;
    let f = |t: f64| {
        const D: f64 = 6.0 / 29.0;
        if t > D * D * D {
            t.cbrt()
        } else {
            t / (3.0 * D * D) + 4.0 / 29.0
        }
    };
    let (fx, fy, fz) = (f(x / D65[0]), f(y / D65[1]), f(z / D65[2]));
    [116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)]
}

/// CIE 1976 colour difference ΔE*ab.
pub fn delta_e76(a: [f64; 3], b: [f64; 3]) -> f64 {
    ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2) + (a[2] - b[2]).powi(2)).sqrt()
}

/// CIEDE2000 colour difference (kL = kC = kH = 1), following the equations of Sharma, Wu
/// & Dalal (2005), "The CIEDE2000 color-difference formula: implementation notes,
/// supplementary test data, and mathematical observations", Color Res. Appl. 30(1).
pub fn ciede2000(lab1: [f64; 3], lab2: [f64; 3]) -> f64 {
    let [l1, a1, b1] = lab1;
    let [l2, a2, b2] = lab2;
    let c1 = a1.hypot(b1);
    let c2 = a2.hypot(b2);
    let c_bar7 = ((c1 + c2) / 2.0).powi(7);
    let g = 0.5 * (1.0 - (c_bar7 / (c_bar7 + 25f64.powi(7))).sqrt());
    let a1p = (1.0 + g) * a1;
    let a2p = (1.0 + g) * a2;
    let c1p = a1p.hypot(b1);
    let c2p = a2p.hypot(b2);
    let hue = |b: f64, a: f64| {
        if b == 0.0 && a == 0.0 {
            0.0
        } else {
            let h = b.atan2(a).to_degrees();
            if h < 0.0 {
                h + 360.0
            } else {
                h
            }
        }
    };
    let h1p = hue(b1, a1p);
    let h2p = hue(b2, a2p);
    let dl = l2 - l1;
    let dc = c2p - c1p;
    let dh = if c1p * c2p == 0.0 {
        0.0
    } else if (h2p - h1p).abs() <= 180.0 {
        h2p - h1p
    } else if h2p - h1p > 180.0 {
        h2p - h1p - 360.0
    } else {
        h2p - h1p + 360.0
    };
    let d_big_h = 2.0 * (c1p * c2p).sqrt() * (dh.to_radians() / 2.0).sin();
    let l_bar = (l1 + l2) / 2.0;
    let c_bar_p = (c1p + c2p) / 2.0;
    let h_bar = if c1p * c2p == 0.0 {
        h1p + h2p
    } else if (h1p - h2p).abs() <= 180.0 {
        (h1p + h2p) / 2.0
    } else if h1p + h2p < 360.0 {
        (h1p + h2p + 360.0) / 2.0
    } else {
        (h1p + h2p - 360.0) / 2.0
    };
    let t = 1.0 - 0.17 * (h_bar - 30.0).to_radians().cos()
        + 0.24 * (2.0 * h_bar).to_radians().cos()
        + 0.32 * (3.0 * h_bar + 6.0).to_radians().cos()
        - 0.20 * (4.0 * h_bar - 63.0).to_radians().cos();
    let d_theta = 30.0 * (-((h_bar - 275.0) / 25.0).powi(2)).exp();
    let c_bar_p7 = c_bar_p.powi(7);
    let r_c = 2.0 * (c_bar_p7 / (c_bar_p7 + 25f64.powi(7))).sqrt();
    let l50 = (l_bar - 50.0).powi(2);
    let s_l = 1.0 + 0.015 * l50 / (20.0 + l50).sqrt();
    let s_c = 1.0 + 0.045 * c_bar_p;
    let s_h = 1.0 + 0.015 * c_bar_p * t;
    let r_t = -(2.0 * d_theta).to_radians().sin() * r_c;
    let (ql, qc, qh) = (dl / s_l, dc / s_c, d_big_h / s_h);
    (ql * ql + qc * qc + qh * qh + r_t * qc * qh).sqrt()
}

// ---------------------------------------------------------------------------------------
// Shapes

/// A region of the picture, in pixel units (pixel (x, y) spans [x, x+1) × [y, y+1)).
enum Shape {
    /// The whole picture.
    Full,
    /// Below the curve y = y0 + slope (x - x0) + bend (x - x0)².
    Below {
        x0: f64,
        y0: f64,
        slope: f64,
        bend: f64,
    },
    Disc {
        cx: f64,
        cy: f64,
        r: f64,
    },
    Rect {
        x0: f64,
        y0: f64,
        x1: f64,
        y1: f64,
    },
    /// Closed polygon, even-odd rule.
    Polygon(Vec<[f64; 2]>),
    /// Union of rectangles [x0, y0, x1, y1].
    Rects(Vec<[f64; 4]>),
}

impl Shape {
    fn contains(&self, x: f64, y: f64) -> bool {
        match self {
            Shape::Full => true,
            Shape::Below {
                x0,
                y0,
                slope,
                bend,
            } => {
                let d = x - x0;
                y > y0 + slope * d + bend * d * d
            }
            Shape::Disc { cx, cy, r } => {
                let (dx, dy) = (x - cx, y - cy);
                dx * dx + dy * dy < r * r
            }
            Shape::Rect { x0, y0, x1, y1 } => x >= *x0 && x < *x1 && y >= *y0 && y < *y1,
            Shape::Polygon(p) => {
                let mut inside = false;
                let mut j = p.len() - 1;
                for i in 0..p.len() {
                    let ([xi, yi], [xj, yj]) = (p[i], p[j]);
                    if (yi > y) != (yj > y) && x < (xj - xi) * (y - yi) / (yj - yi) + xi {
                        inside = !inside;
                    }
                    j = i;
                }
                inside
            }
            Shape::Rects(rs) => rs
                .iter()
                .any(|r| x >= r[0] && x < r[2] && y >= r[1] && y < r[3]),
        }
    }
}

/// Five-pointed star, point up; `inner` is the radius of the notches. The sines and
/// cosines of multiples of 36° are written out, so no library trigonometry is used.
fn star(cx: f64, cy: f64, outer: f64, inner: f64) -> Shape {
    const S36: f64 = 0.587_785_252_292_473_1;
    const S72: f64 = 0.951_056_516_295_153_5;
    const C36: f64 = 0.809_016_994_374_947_5;
    const C72: f64 = 0.309_016_994_374_947_45;
    let sin = [0.0, S36, S72, S72, S36, 0.0, -S36, -S72, -S72, -S36];
    let cos = [1.0, C36, C72, -C72, -C36, -1.0, -C36, -C72, C72, C36];
    let pts = (0..10)
        .map(|k| {
            let r = if k % 2 == 0 { outer } else { inner };
            [cx + r * sin[k], cy - r * cos[k]]
        })
        .collect();
    Shape::Polygon(pts)
}

/// The generator for a scene's text-like dots (its own stream, apart from the grain).
fn dots_rng(name: &str) -> SplitMix64 {
    SplitMix64(seed_of(name) ^ 0x7465_7874_646F_7473)
}

/// A straight rule (bar) of the given width from (x0, y0) to (x1, y1), square ends.
fn rule(x0: f64, y0: f64, x1: f64, y1: f64, width: f64) -> Shape {
    let (dx, dy) = (x1 - x0, y1 - y0);
    let len = (dx * dx + dy * dy).sqrt();
    let (nx, ny) = (-dy / len * width / 2.0, dx / len * width / 2.0);
    Shape::Polygon(vec![
        [x0 + nx, y0 + ny],
        [x1 + nx, y1 + ny],
        [x1 - nx, y1 - ny],
        [x0 - nx, y0 - ny],
    ])
}

/// Text-like dots: `lines` lines of `per_line` glyphs, each glyph a 3 × 5 grid of square
/// dots of `dot` pixels on a pitch of `dot + 1`, patterns drawn from `rng`; top-left at
/// (x0, y0) (whole pixels, so the dots are crisp like printed type).
fn text_dots(rng: &mut SplitMix64, x0: u32, y0: u32, per_line: u32, lines: u32, dot: u32) -> Shape {
    let pitch = dot + 1;
    let glyph_w = 3 * pitch + pitch; // three dots and a gap
    let line_h = 5 * pitch + 2 * pitch;
    let mut rects = Vec::new();
    for line in 0..lines {
        for g in 0..per_line {
            // At least six of the fifteen dots on, so every glyph reads as a mark.
            let bits = loop {
                let b = rng.next_u64() & 0x7FFF;
                if b.count_ones() >= 6 {
                    break b;
                }
            };
            for cell in 0..15u32 {
                if bits >> cell & 1 == 1 {
                    let x = x0 + g * glyph_w + (cell % 3) * pitch;
                    let y = y0 + line * line_h + (cell / 3) * pitch;
                    rects.push([x as f64, y as f64, (x + dot) as f64, (y + dot) as f64]);
                }
            }
        }
    }
    Shape::Rects(rects)
}

// ---------------------------------------------------------------------------------------
// Scenes

/// A linear gradient: colour = nominal + s · half_span (sRGB levels), with s going from
/// -1 at `from` to +1 at `to` (held outside).
struct Gradient {
    from: [f64; 2],
    to: [f64; 2],
    half_span: [f64; 3],
}

impl Gradient {
    fn s(&self, x: f64, y: f64) -> f64 {
        let (vx, vy) = (self.to[0] - self.from[0], self.to[1] - self.from[1]);
        let t = ((x - self.from[0]) * vx + (y - self.from[1]) * vy) / (vx * vx + vy * vy);
        2.0 * t.clamp(0.0, 1.0) - 1.0
    }
    fn colour(&self, base: [u8; 3], s: f64) -> [f64; 3] {
        [0, 1, 2].map(|i| base[i] as f64 + s * self.half_span[i])
    }
}

/// One layer (and colour family) of a scene; layers are painted in order, later on top.
struct Layer {
    name: &'static str,
    srgb: [u8; 3],
    small: bool,
    shape: Shape,
    gradient: Option<Gradient>,
}

fn area(name: &'static str, srgb: [u8; 3], shape: Shape) -> Layer {
    Layer {
        name,
        srgb,
        small: false,
        shape,
        gradient: None,
    }
}

fn graded(name: &'static str, srgb: [u8; 3], shape: Shape, g: Gradient) -> Layer {
    Layer {
        name,
        srgb,
        small: false,
        shape,
        gradient: Some(g),
    }
}

fn mark(name: &'static str, srgb: [u8; 3], shape: Shape) -> Layer {
    Layer {
        name,
        srgb,
        small: true,
        shape,
        gradient: None,
    }
}

/// Vertical gradient over the whole height (s = -1 at the top).
fn down(h: u32, half_span: [f64; 3]) -> Gradient {
    Gradient {
        from: [0.0, 0.0],
        to: [0.0, h as f64],
        half_span,
    }
}

/// Horizontal gradient over the whole width (s = -1 at the left).
fn across(w: u32, half_span: [f64; 3]) -> Gradient {
    Gradient {
        from: [0.0, 0.0],
        to: [w as f64, 0.0],
        half_span,
    }
}

struct Scene {
    name: &'static str,
    width: u32,
    height: u32,
    /// Print grain: standard deviation of the sRGB noise, in levels.
    grain: f64,
    /// Allowed ΔE*ab between the two ends of the gradient.
    span: (f64, f64),
    layers: Vec<Layer>,
}

/// Least CIEDE2000 between any two families for [`artwork_set`] to accept a scene.
pub const MIN_FAMILY_DE00: f64 = 15.0;

fn below(x0: f64, y0: f64, slope: f64, bend: f64) -> Shape {
    Shape::Below {
        x0,
        y0,
        slope,
        bend,
    }
}

fn disc(cx: f64, cy: f64, r: f64) -> Shape {
    Shape::Disc { cx, cy, r }
}

fn rect(x0: f64, y0: f64, x1: f64, y1: f64) -> Shape {
    Shape::Rect { x0, y0, x1, y1 }
}

/// The posters. Colours, sizes and places are our own; every scene is checked by
/// [`check`] when it is drawn.
fn scenes() -> Vec<Scene> {
    let poster = (8.0, 14.0);
    let mut v = Vec::new();

    // A country fair: cream sky, a big orange sun, a ploughed field, a barn, a rule.
    let (name, w, h) = ("harvest-fair", 360, 270);
    v.push(Scene {
        name,
        width: w,
        height: h,
        grain: 3.0,
        span: poster,
        layers: vec![
            area("cream-sky", [243, 233, 205], Shape::Full),
            area("orange-sun", [238, 140, 48], disc(250.3, 95.6, 56.2)),
            graded(
                "brown-field",
                [125, 82, 50],
                below(180.0, 168.4, 0.08, 0.0009),
                across(w, [14.0, 10.0, 6.0]),
            ),
            mark("red-barn", [200, 30, 38], rect(60.25, 176.5, 77.75, 193.0)),
            mark(
                "navy-rule",
                [35, 50, 100],
                rule(30.0, 238.0, 200.0, 226.0, 3.5),
            ),
        ],
    });

    // A night market: deep blue sky, black street, teal awning, a lantern, the moon, a sign.
    let (name, w, h) = ("night-market", 320, 240);
    let mut d = dots_rng(name);
    v.push(Scene {
        name,
        width: w,
        height: h,
        grain: 4.0,
        span: poster,
        layers: vec![
            graded(
                "night-blue",
                [28, 40, 105],
                Shape::Full,
                down(h, [-8.0, -10.0, -14.0]),
            ),
            area("street-black", [18, 18, 20], below(160.0, 190.0, 0.0, 0.0)),
            area(
                "teal-awning",
                [0, 128, 128],
                Shape::Polygon(vec![
                    [40.0, 120.5],
                    [280.0, 120.5],
                    [262.3, 150.2],
                    [57.7, 150.2],
                ]),
            ),
            mark(
                "yellow-lantern",
                [252, 212, 40],
                star(70.4, 62.2, 10.5, 4.4),
            ),
            mark("white-moon", [248, 248, 240], disc(262.6, 40.3, 7.3)),
            mark(
                "pink-sign",
                [240, 80, 160],
                text_dots(&mut d, 120, 204, 6, 1, 2),
            ),
        ],
    });

    // A beach kiosk: sky, sea, sand; a red flag, a white buoy, a pink shell, a black rail.
    let (name, w, h) = ("beach-kiosk", 400, 300);
    v.push(Scene {
        name,
        width: w,
        height: h,
        grain: 2.5,
        span: poster,
        layers: vec![
            graded(
                "sky-blue",
                [135, 195, 235],
                Shape::Full,
                down(h, [14.0, 12.0, 8.0]),
            ),
            area("sea-teal", [20, 120, 150], below(200.0, 150.0, 0.0, 0.0)),
            area("sand", [226, 200, 150], below(200.0, 215.0, -0.12, 0.0004)),
            mark("red-flag", [215, 35, 40], rect(300.0, 40.5, 316.0, 50.5)),
            mark("white-buoy", [252, 252, 252], disc(120.4, 178.3, 7.0)),
            mark("pink-shell", [245, 140, 185], star(90.2, 262.7, 12.0, 5.0)),
            mark(
                "black-rail",
                [25, 25, 25],
                rule(220.0, 250.5, 340.0, 250.5, 3.0),
            ),
        ],
    });

    // A nursery print in pastels: mint wall, a pink balloon, a lavender floor, small toys.
    let (name, w, h) = ("pastel-nursery", 300, 225);
    let mut d = dots_rng(name);
    v.push(Scene {
        name,
        width: w,
        height: h,
        grain: 2.0,
        span: poster,
        layers: vec![
            graded(
                "mint-wall",
                [200, 236, 215],
                Shape::Full,
                across(w, [14.0, 8.0, 12.0]),
            ),
            area("pink-balloon", [250, 200, 212], disc(100.2, 90.7, 60.0)),
            area(
                "lavender-floor",
                [196, 184, 230],
                below(150.0, 170.0, 0.02, 0.0002),
            ),
            mark("butter-star", [250, 236, 160], star(230.5, 60.3, 14.0, 6.0)),
            mark(
                "peach-text",
                [250, 175, 130],
                text_dots(&mut d, 170, 190, 5, 1, 2),
            ),
            mark(
                "blue-block",
                [150, 205, 245],
                rect(213.5, 119.25, 237.5, 133.25),
            ),
        ],
    });

    // A warning notice: red ground, black band, white lettering, a yellow rule.
    let (name, w, h) = ("red-alert", 240, 180);
    let mut d = dots_rng(name);
    v.push(Scene {
        name,
        width: w,
        height: h,
        grain: 4.0,
        span: poster,
        layers: vec![
            graded(
                "signal-red",
                [220, 30, 30],
                Shape::Full,
                down(h, [22.0, 10.0, 10.0]),
            ),
            area("black-band", [20, 20, 22], below(120.0, 130.0, 0.05, 0.0)),
            mark(
                "white-text",
                [255, 255, 255],
                text_dots(&mut d, 24, 40, 8, 1, 2),
            ),
            mark(
                "yellow-rule",
                [250, 220, 0],
                rule(40.0, 160.0, 200.0, 160.0, 2.0),
            ),
        ],
    });

    // A fruit label: cream card, a sky panel, a green hill, brown soil, fruit and text.
    let (name, w, h) = ("orchard-label", 440, 330);
    let mut d = dots_rng(name);
    v.push(Scene {
        name,
        width: w,
        height: h,
        grain: 2.5,
        span: poster,
        layers: vec![
            area("cream-card", [245, 238, 215], Shape::Full),
            area("sky-panel", [140, 190, 230], rect(20.0, 20.0, 420.0, 110.0)),
            graded(
                "green-hill",
                [45, 105, 60],
                below(220.0, 160.0, 0.0, 0.0012),
                across(w, [12.0, 16.0, 10.0]),
            ),
            area("brown-soil", [115, 75, 45], below(220.0, 280.0, 0.0, 0.0)),
            mark("red-apple", [205, 25, 45], disc(300.6, 230.2, 10.0)),
            mark("yellow-star", [250, 205, 20], star(80.3, 60.4, 15.0, 6.0)),
            mark(
                "pink-tag",
                [240, 150, 185],
                rect(360.0, 295.5, 382.0, 309.5),
            ),
            mark(
                "black-text",
                [20, 20, 20],
                text_dots(&mut d, 30, 118, 10, 1, 3),
            ),
        ],
    });

    // A museum ticket: paper, a grey band, a crimson rule, navy lettering.
    let (name, w, h) = ("museum-ticket", 280, 210);
    let mut d = dots_rng(name);
    v.push(Scene {
        name,
        width: w,
        height: h,
        grain: 2.0,
        span: poster,
        layers: vec![
            area("paper-white", [250, 249, 245], Shape::Full),
            graded(
                "grey-band",
                [150, 150, 150],
                rect(0.0, 60.0, 280.0, 150.0),
                across(w, [14.0, 14.0, 14.0]),
            ),
            mark(
                "crimson-rule",
                [165, 15, 50],
                rule(232.0, 40.0, 236.0, 170.0, 4.0),
            ),
            mark(
                "navy-text",
                [30, 40, 90],
                text_dots(&mut d, 20, 160, 6, 2, 2),
            ),
        ],
    });

    // A citrus crate label: lemon ground, an orange, leaves, a white blossom, marks.
    let (name, w, h) = ("citrus-crate", 360, 240);
    v.push(Scene {
        name,
        width: w,
        height: h,
        grain: 5.0,
        span: poster,
        layers: vec![
            graded(
                "lemon-ground",
                [250, 225, 60],
                Shape::Full,
                down(h, [4.0, 14.0, 20.0]),
            ),
            area("orange-fruit", [240, 135, 30], disc(240.0, 100.0, 60.0)),
            area("leaf-green", [60, 140, 50], below(180.0, 185.0, -0.1, 0.0)),
            mark(
                "white-blossom",
                [255, 255, 255],
                star(255.2, 80.6, 13.0, 5.5),
            ),
            mark(
                "navy-rule",
                [30, 40, 90],
                rule(40.0, 50.5, 150.0, 50.5, 3.0),
            ),
            mark("pink-dot", [225, 45, 130], disc(90.3, 130.8, 8.0)),
        ],
    });

    // A winter fair: frosty sky, a slate slope, a red star, a yellow lamp, a pine block.
    let (name, w, h) = ("winter-fair", 260, 195);
    v.push(Scene {
        name,
        width: w,
        height: h,
        grain: 3.0,
        span: poster,
        layers: vec![
            graded(
                "frost-sky",
                [222, 232, 244],
                Shape::Full,
                down(h, [-14.0, -12.0, -8.0]),
            ),
            area("slate-slope", [95, 105, 120], below(130.0, 130.0, 0.3, 0.0)),
            mark("red-star", [210, 30, 40], star(60.6, 50.2, 11.0, 4.6)),
            mark("yellow-lamp", [250, 210, 40], disc(200.4, 40.4, 6.0)),
            mark("pine-block", [30, 90, 60], rect(30.0, 100.25, 38.0, 120.25)),
        ],
    });

    // A jazz night flyer: black ground, a purple moon, a mustard stage, four accents.
    let (name, w, h) = ("jazz-flyer", 320, 240);
    let mut d = dots_rng(name);
    v.push(Scene {
        name,
        width: w,
        height: h,
        grain: 4.0,
        span: poster,
        layers: vec![
            area("night-black", [15, 15, 18], Shape::Full),
            area("purple-moon", [95, 45, 140], disc(110.0, 100.0, 70.0)),
            graded(
                "mustard-stage",
                [200, 160, 40],
                below(160.0, 185.0, 0.0, 0.0),
                across(w, [14.0, 12.0, 4.0]),
            ),
            mark(
                "pink-line",
                [240, 60, 150],
                rule(200.0, 40.0, 300.0, 160.0, 4.0),
            ),
            mark(
                "white-text",
                [250, 250, 250],
                text_dots(&mut d, 40, 205, 8, 1, 2),
            ),
            mark("teal-ticket", [0, 150, 150], rect(250.0, 20.5, 268.0, 30.5)),
            mark("lime-spot", [160, 210, 40], disc(230.4, 120.2, 7.0)),
        ],
    });

    // A garden show card: lime lawn, a white sign, a pink flower, a purple star.
    let (name, w, h) = ("garden-show", 200, 150);
    v.push(Scene {
        name,
        width: w,
        height: h,
        grain: 3.0,
        span: poster,
        layers: vec![
            graded(
                "lime-lawn",
                [150, 200, 80],
                Shape::Full,
                down(h, [14.0, 14.0, 10.0]),
            ),
            area(
                "white-sign",
                [252, 252, 250],
                rect(110.0, 20.0, 190.0, 130.0),
            ),
            mark("pink-flower", [240, 120, 170], disc(50.3, 100.6, 6.0)),
            mark("purple-star", [110, 50, 150], star(150.2, 75.4, 11.0, 4.6)),
        ],
    });

    // A tide table: pale blue ground, a white table, navy sea; orange, red and yellow marks.
    let (name, w, h) = ("tide-chart", 420, 280);
    let mut d = dots_rng(name);
    v.push(Scene {
        name,
        width: w,
        height: h,
        grain: 2.0,
        span: poster,
        layers: vec![
            graded(
                "pale-blue",
                [165, 200, 235],
                Shape::Full,
                across(w, [12.0, 12.0, 8.0]),
            ),
            area(
                "white-table",
                [255, 255, 255],
                rect(30.0, 40.0, 390.0, 150.0),
            ),
            area("navy-sea", [25, 40, 85], below(210.0, 215.0, 0.0, 0.0003)),
            mark(
                "orange-rule",
                [240, 120, 20],
                rule(50.0, 100.0, 370.0, 100.0, 2.0),
            ),
            mark(
                "red-figures",
                [200, 20, 30],
                text_dots(&mut d, 50, 60, 9, 1, 2),
            ),
            mark(
                "yellow-buoy",
                [255, 215, 0],
                rect(300.0, 240.5, 324.0, 252.5),
            ),
        ],
    });

    // Sky with seven small flat shapes, for the ink-matching case (fixtures/families/sky-inks.csv).
    let (name, w, h) = ("sky-shapes", 360, 270);
    let mut d = dots_rng(name);
    v.push(Scene {
        name,
        width: w,
        height: h,
        grain: 2.0,
        span: (22.0, 28.0),
        layers: vec![
            graded(
                "sky",
                [130, 175, 228],
                Shape::Full,
                down(h, [-32.0, -26.0, -10.0]),
            ),
            mark("red-disc", [215, 30, 40], disc(60.4, 50.3, 8.0)),
            mark("yellow-star", [250, 215, 0], star(300.3, 60.2, 12.0, 5.0)),
            mark(
                "white-card",
                [255, 255, 255],
                rect(180.0, 120.5, 200.0, 132.5),
            ),
            mark(
                "black-rule",
                [20, 20, 20],
                rule(40.0, 226.5, 140.0, 226.5, 3.0),
            ),
            mark(
                "pink-text",
                [240, 110, 170],
                text_dots(&mut d, 220, 220, 5, 1, 2),
            ),
            mark("green-disc", [40, 150, 60], disc(110.6, 150.5, 7.0)),
            mark("orange-star", [245, 130, 20], star(300.5, 180.4, 11.0, 4.6)),
        ],
    });

    v
}

// ---------------------------------------------------------------------------------------
// Rendering

fn render(scene: Scene) -> Artwork {
    let (w, h) = (scene.width, scene.height);
    let mut grain = SplitMix64(seed_of(scene.name));
    let n = scene.layers.len();
    let mut rgb = Vec::with_capacity((w * h * 3) as usize);
    let mut counts = vec![0u64; n];
    let mut lab_sums = vec![[0.0f64; 3]; n];
    let mut cover = vec![0u32; n];
    for y in 0..h {
        for x in 0..w {
            cover.iter_mut().for_each(|c| *c = 0);
            for sy in 0..4 {
                for sx in 0..4 {
                    let px = x as f64 + (sx as f64 + 0.5) / 4.0;
                    let py = y as f64 + (sy as f64 + 0.5) / 4.0;
                    let top = (0..n)
                        .rev()
                        .find(|&l| scene.layers[l].shape.contains(px, py))
                        .expect("the bottom layer covers the picture");
                    cover[top] += 1;
                }
            }
            let (cx, cy) = (x as f64 + 0.5, y as f64 + 0.5);
            let mut mix = [0.0f64; 3];
            for (l, layer) in scene.layers.iter().enumerate() {
                if cover[l] == 0 {
                    continue;
                }
                let c = match &layer.gradient {
                    Some(g) => g.colour(layer.srgb, g.s(cx, cy)),
                    None => layer.srgb.map(f64::from),
                };
                let wgt = cover[l] as f64 / 16.0;
                for i in 0..3 {
                    mix[i] += wgt * c[i];
                }
            }
            let mut px = [0u8; 3];
            for i in 0..3 {
                let v = mix[i] + scene.grain * grain.normal();
                px[i] = v.round().clamp(0.0, 255.0) as u8;
            }
            rgb.extend_from_slice(&px);
            // Nominal family: largest coverage; a tie goes to the layer underneath, so a
            // half-covered edge pixel joins the larger area and not the small shape.
            let mut best = 0;
            for l in 1..n {
                if cover[l] > cover[best] {
                    best = l;
                }
            }
            counts[best] += 1;
            let lab = srgb8_to_lab(px);
            for i in 0..3 {
                lab_sums[best][i] += lab[i];
            }
        }
    }
    let families: Vec<Family> = scene
        .layers
        .iter()
        .enumerate()
        .map(|(l, layer)| Family {
            name: layer.name.to_string(),
            srgb: layer.srgb,
            lab: lab_sums[l].map(|s| s / counts[l].max(1) as f64),
            pixels: counts[l],
            small: layer.small,
        })
        .collect();
    check(&scene, &families);
    Artwork {
        name: scene.name.to_string(),
        k: families.len(),
        width: w,
        height: h,
        rgb,
        families,
    }
}

/// Colours a family stands for when checking distances: its nominal colour, or nine
/// points along its gradient.
fn reference_labs(layer: &Layer) -> Vec<[f64; 3]> {
    match &layer.gradient {
        None => vec![srgb8_to_lab(layer.srgb)],
        Some(g) => (0..9)
            .map(|i| srgb_to_lab(g.colour(layer.srgb, -1.0 + i as f64 / 4.0)))
            .collect(),
    }
}

/// Panics (listing every problem) unless the scene keeps to its stated ranges.
fn check(scene: &Scene, families: &[Family]) {
    let total = (scene.width * scene.height) as f64;
    let mut bad = Vec::new();
    let k = families.len();
    let (kmin, kmax) = (4, 8);
    if k < kmin || k > kmax {
        bad.push(format!("{k} families, expected {kmin}..={kmax}"));
    }
    let graded: Vec<&Layer> = scene
        .layers
        .iter()
        .filter(|l| l.gradient.is_some())
        .collect();
    if graded.len() != 1 {
        bad.push(format!("{} gradient areas, expected 1", graded.len()));
    }
    for l in &graded {
        let g = l.gradient.as_ref().unwrap();
        let (a, b) = (g.colour(l.srgb, -1.0), g.colour(l.srgb, 1.0));
        if a.iter().chain(b.iter()).any(|v| !(0.0..=255.0).contains(v)) {
            bad.push(format!("{}: gradient leaves the sRGB range", l.name));
        }
        let span = delta_e76(srgb_to_lab(a), srgb_to_lab(b));
        if span < scene.span.0 || span > scene.span.1 {
            bad.push(format!(
                "{}: gradient spans {span:.1} ΔE*ab, expected {}..{}",
                l.name, scene.span.0, scene.span.1
            ));
        }
    }
    for f in families {
        let frac = f.pixels as f64 / total;
        if f.small && !(0.001..=0.01).contains(&frac) {
            bad.push(format!(
                "{}: small shape covers {:.3} %",
                f.name,
                100.0 * frac
            ));
        }
        if !f.small && frac < 0.05 {
            bad.push(format!(
                "{}: large area covers only {:.2} %",
                f.name,
                100.0 * frac
            ));
        }
    }
    let refs: Vec<Vec<[f64; 3]>> = scene.layers.iter().map(reference_labs).collect();
    for i in 0..k {
        for j in i + 1..k {
            let mut d = ciede2000(families[i].lab, families[j].lab);
            for a in &refs[i] {
                for b in &refs[j] {
                    d = d.min(ciede2000(*a, *b));
                }
            }
            if d < MIN_FAMILY_DE00 {
                bad.push(format!(
                    "{} and {} are only {d:.1} ΔE00 apart",
                    families[i].name, families[j].name
                ));
            }
        }
    }
    if !bad.is_empty() {
        panic!("scene {}: {}", scene.name, bad.join("; "));
    }
}

/// The whole deterministic set (same bytes every call, any platform).
pub fn artwork_set() -> Vec<Artwork> {
    scenes().into_iter().map(render).collect()
}

/// Encodes as PNG (best compression, adaptive filters), deterministic.
pub fn encode_png(a: &Artwork) -> Vec<u8> {
    let mut out = Vec::new();
    PngEncoder::new_with_quality(&mut out, CompressionType::Best, FilterType::Adaptive)
        .write_image(&a.rgb, a.width, a.height, ExtendedColorType::Rgb8)
        .expect("PNG encoding to memory");
    out
}

/// Encodes as baseline JPEG at the given quality (1–100), deterministic.
pub fn encode_jpeg(a: &Artwork, quality: u8) -> Vec<u8> {
    let mut out = Vec::new();
    JpegEncoder::new_with_quality(&mut out, quality)
        .write_image(&a.rgb, a.width, a.height, ExtendedColorType::Rgb8)
        .expect("JPEG encoding to memory");
    out
}
