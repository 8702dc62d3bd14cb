//! Colour difference: CIE76 (ΔE*ab) and CIEDE2000 (CIE 142-2001), on CIELAB triples.

/// CIE76 colour difference: Euclidean distance in CIELAB (also used for OKLab distances).
pub fn delta_e76(a: [f64; 3], b: [f64; 3]) -> f64 {
    let d0 = a[0] - b[0];
    let d1 = a[1] - b[1];
    let d2 = a[2] - b[2];
    (d0 * d0 + d1 * d1 + d2 * d2).sqrt()
}

/// Hue differences this close to 180° are treated as exactly 180°, the case the
/// formula's branch rules define (Sharma, Wu & Dalal 2005, eqs. 10 and 14); without it,
/// rounding in `atan2` decides between two results that differ by up to 0.06 ΔE00.
const HUE_TIE: f64 = 1e-9;

// Cosines and sines of the fixed angles in T (30°, 6°, 63°).
const COS_30: f64 = 0.866_025_403_784_438_6;
const SIN_30: f64 = 0.5;
const COS_6: f64 = 0.994_521_895_368_273_3;
const SIN_6: f64 = 0.104_528_463_267_653_47;
const COS_63: f64 = 0.453_990_499_739_546_8;
const SIN_63: f64 = 0.891_006_524_188_367_9;

/// T = 1 − 0.17 cos(h̄′ − 30°) + 0.24 cos(2h̄′) + 0.32 cos(3h̄′ + 6°) − 0.20 cos(4h̄′ − 63°),
/// `h` = h̄′ in radians. The multiple angles come from one sine and cosine of h̄′ through
/// the angle-sum and multiple-angle identities: the same value to within a few units in
/// the last place (unit test), for one trigonometric call instead of four.
#[inline]
fn hue_weight_t(h: f64) -> f64 {
    let (s1, c1) = h.sin_cos();
    let (s2, c2) = (2.0 * s1 * c1, c1 * c1 - s1 * s1);
    let (s3, c3) = (s1 * (3.0 - 4.0 * s1 * s1), c1 * (4.0 * c1 * c1 - 3.0));
    let (s4, c4) = (2.0 * s2 * c2, c2 * c2 - s2 * s2);
    1.0 - 0.17 * (c1 * COS_30 + s1 * SIN_30) + 0.24 * c2 + 0.32 * (c3 * COS_6 - s3 * SIN_6)
        - 0.20 * (c4 * COS_63 + s4 * SIN_63)
}

/// CIEDE2000 colour difference with kL = kC = kH = 1, following the implementation
/// notes of Sharma, Wu & Dalal (2005), Color Research & Application 30(1), 21–30.
pub fn delta_e2000(lab1: [f64; 3], lab2: [f64; 3]) -> f64 {
    use std::f64::consts::PI;
    let [l1, a1, b1] = lab1;
    let [l2, a2, b2] = lab2;
    let pow25_7 = 6_103_515_625.0f64; // 25^7
    let c1 = (a1 * a1 + b1 * b1).sqrt();
    let c2 = (a2 * a2 + b2 * b2).sqrt();
    let c_bar = 0.5 * (c1 + c2);
    let c_bar7 = c_bar.powi(7);
    let g = 0.5 * (1.0 - (c_bar7 / (c_bar7 + pow25_7)).sqrt());
    let a1p = (1.0 + g) * a1;
    let a2p = (1.0 + g) * a2;
    let c1p = (a1p * a1p + b1 * b1).sqrt();
    let c2p = (a2p * a2p + b2 * b2).sqrt();
    let hue = |b: f64, ap: f64| {
        if b == 0.0 && ap == 0.0 {
            0.0
        } else {
            let h = b.atan2(ap).to_degrees();
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
    let cprod = c1p * c2p;
    let diff = h2p - h1p;
    let dh = if cprod == 0.0 {
        0.0
    } else if diff.abs() <= 180.0 + HUE_TIE {
        diff
    } else if diff > 180.0 {
        diff - 360.0
    } else {
        diff + 360.0
    };
    let d_big_h = 2.0 * cprod.sqrt() * (dh.to_radians() * 0.5).sin();

    let l_bar = 0.5 * (l1 + l2);
    let cp_bar = 0.5 * (c1p + c2p);
    let h_bar = if cprod == 0.0 {
        h1p + h2p
    } else if (h1p - h2p).abs() <= 180.0 + HUE_TIE {
        0.5 * (h1p + h2p)
    } else if h1p + h2p < 360.0 {
        0.5 * (h1p + h2p + 360.0)
    } else {
        0.5 * (h1p + h2p - 360.0)
    };
    let rad = |deg: f64| deg * PI / 180.0;
    let t = hue_weight_t(rad(h_bar));
    let d_theta = 30.0 * (-((h_bar - 275.0) / 25.0).powi(2)).exp();
    let cp_bar7 = cp_bar.powi(7);
    let r_c = 2.0 * (cp_bar7 / (cp_bar7 + pow25_7)).sqrt();
    let lm50 = (l_bar - 50.0) * (l_bar - 50.0);
    let s_l = 1.0 + 0.015 * lm50 / (20.0 + lm50).sqrt();
    let s_c = 1.0 + 0.045 * cp_bar;
    let s_h = 1.0 + 0.015 * cp_bar * t;
    let r_t = -(rad(2.0 * d_theta)).sin() * r_c;
    let tl = dl / s_l;
    let tc = dc / s_c;
    let th = d_big_h / s_h;
    (tl * tl + tc * tc + th * th + r_t * tc * th)
        .max(0.0)
        .sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn identical_colours_have_zero_difference() {
        for lab in [[50.0, 0.0, 0.0], [30.0, 20.0, -40.0], [100.0, 0.0, 0.0]] {
            assert_eq!(delta_e2000(lab, lab), 0.0);
            assert_eq!(delta_e76(lab, lab), 0.0);
        }
    }

    #[test]
    fn hue_weight_from_identities_equals_the_four_cosines() {
        // Every tenth of a degree: the printed formula (Sharma, Wu & Dalal 2005, eq. 15).
        let rad = |deg: f64| deg * std::f64::consts::PI / 180.0;
        for i in 0..3600 {
            let h = i as f64 / 10.0;
            let direct = 1.0 - 0.17 * rad(h - 30.0).cos()
                + 0.24 * rad(2.0 * h).cos()
                + 0.32 * rad(3.0 * h + 6.0).cos()
                - 0.20 * rad(4.0 * h - 63.0).cos();
            let got = hue_weight_t(rad(h));
            assert!(
                (got - direct).abs() <= 1e-14,
                "h̄′ = {h}°: {got} vs {direct}"
            );
        }
    }

    #[test]
    fn cie76_is_euclidean() {
        assert_eq!(delta_e76([0.0, 0.0, 0.0], [3.0, 4.0, 0.0]), 5.0);
    }
}
