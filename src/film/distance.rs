//! Exact Euclidean distance transform (P. Felzenszwalb and D. Huttenlocher, "Distance
//! Transforms of Sampled Functions", Theory of Computing 8, 2012): for every pixel, the
//! squared distance between its centre and the centre of the nearest background pixel.
//! Everything outside the image counts as background, so ink at the image edge is as far
//! from the background as from the edge.

/// Squared Euclidean distance from each pixel to the nearest pixel where `ink` is false
/// (or outside the `width × height` image); 0 on background pixels.
pub fn squared_distance_to_background(ink: &[bool], width: usize, height: usize) -> Vec<f64> {
    let n = width * height;
    assert_eq!(ink.len(), n, "mask size matches the image");
    let mut g = vec![0f64; n];
    // Columns: distance to the nearest background in the column, with background rows
    // at -1 and `height`.
    for x in 0..width {
        let mut d = 0usize;
        for y in 0..height {
            d = if ink[y * width + x] { d + 1 } else { 0 };
            g[y * width + x] = d as f64;
        }
        let mut d = 0usize;
        for y in (0..height).rev() {
            d = if ink[y * width + x] { d + 1 } else { 0 };
            let v = g[y * width + x].min(d as f64);
            g[y * width + x] = v * v;
        }
    }
    // Rows: the lower envelope of parabolas, with background columns at -1 and `width`.
    let m = width + 2;
    let mut f = vec![0f64; m];
    let mut out = vec![0f64; n];
    let mut v = vec![0usize; m];
    let mut z = vec![0f64; m + 1];
    let mut dt = vec![0f64; m];
    for y in 0..height {
        f[0] = 0.0;
        f[m - 1] = 0.0;
        f[1..m - 1].copy_from_slice(&g[y * width..(y + 1) * width]);
        envelope(&f, &mut v, &mut z, &mut dt);
        out[y * width..(y + 1) * width].copy_from_slice(&dt[1..m - 1]);
    }
    out
}

/// One-dimensional squared distance transform of `f` (all finite) into `dt`.
fn envelope(f: &[f64], v: &mut [usize], z: &mut [f64], dt: &mut [f64]) {
    let n = f.len();
    let mut k = 0usize;
    v[0] = 0;
    z[0] = f64::NEG_INFINITY;
    z[1] = f64::INFINITY;
    for q in 1..n {
        let meet =
            |p: usize| ((f[q] + (q * q) as f64) - (f[p] + (p * p) as f64)) / (2.0 * (q - p) as f64);
        let mut s = meet(v[k]);
        // z[0] is -inf, so k never goes below 0.
        while s <= z[k] {
            k -= 1;
            s = meet(v[k]);
        }
        k += 1;
        v[k] = q;
        z[k] = s;
        z[k + 1] = f64::INFINITY;
    }
    let mut k = 0usize;
    for (q, out) in dt.iter_mut().enumerate().take(n) {
        while z[k + 1] < q as f64 {
            k += 1;
        }
        let d = q as f64 - v[k] as f64;
        *out = d * d + f[v[k]];
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Brute force over every background pixel and the border ring.
    fn brute(ink: &[bool], w: usize, h: usize) -> Vec<f64> {
        let mut bg: Vec<(i64, i64)> = Vec::new();
        for y in -1..=h as i64 {
            for x in -1..=w as i64 {
                let inside = x >= 0 && y >= 0 && x < w as i64 && y < h as i64;
                if !inside || !ink[y as usize * w + x as usize] {
                    bg.push((x, y));
                }
            }
        }
        (0..w * h)
            .map(|p| {
                let (x, y) = ((p % w) as i64, (p / w) as i64);
                bg.iter()
                    .map(|&(bx, by)| ((bx - x).pow(2) + (by - y).pow(2)) as f64)
                    .fold(f64::INFINITY, f64::min)
            })
            .collect()
    }

    #[test]
    fn matches_brute_force_on_random_masks() {
        let mut rng = crate::rng::Rng::new(5, 1);
        for &(w, h, fill) in &[(1, 1, 0.9), (7, 3, 0.8), (23, 17, 0.85), (30, 30, 0.97)] {
            let ink: Vec<bool> = (0..w * h).map(|_| rng.uniform() < fill).collect();
            assert_eq!(
                squared_distance_to_background(&ink, w, h),
                brute(&ink, w, h)
            );
        }
    }
}
