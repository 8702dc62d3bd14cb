//! Label images and slow reference answers shared by the tests of the labelling and of the
//! clean-ups built on it (`separate::regions`).

use crate::features::components::FIXED;

/// xorshift64* (Vigna 2016): a small seeded generator for the random label images.
pub(crate) struct XorShift(u64);

impl XorShift {
    pub(crate) fn new(seed: u64) -> Self {
        XorShift(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1)
    }
    pub(crate) fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    pub(crate) fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
}

/// Random blobs: a coarse grid of random labels, blurred edges from per-pixel noise, some
/// single-pixel specks, and (if `fixed`) some FIXED pixels.
pub(crate) fn blobs(seed: u64, w: usize, h: usize, n_labels: u16, fixed: bool) -> Vec<u16> {
    let mut rng = XorShift::new(seed);
    let cell = 1 + rng.below(6) as usize;
    let gw = w / cell + 2;
    let gh = h / cell + 2;
    let grid: Vec<u16> = (0..gw * gh)
        .map(|_| rng.below(n_labels as u64) as u16)
        .collect();
    let mut out = vec![0u16; w * h];
    for y in 0..h {
        for x in 0..w {
            let jx = (x + rng.below(2) as usize) / cell;
            let jy = (y + rng.below(2) as usize) / cell;
            let r = rng.below(100);
            out[y * w + x] = if fixed && r < 6 {
                FIXED
            } else if r < 14 {
                rng.below(n_labels as u64) as u16
            } else {
                grid[jy * gw + jx]
            };
        }
    }
    out
}

pub(crate) fn neighbours(p: usize, w: usize, h: usize) -> Vec<usize> {
    let (x, y) = ((p % w) as i64, (p / w) as i64);
    let mut v = Vec::new();
    for dy in -1..=1i64 {
        for dx in -1..=1i64 {
            let (nx, ny) = (x + dx, y + dy);
            if (dx, dy) != (0, 0) && nx >= 0 && ny >= 0 && nx < w as i64 && ny < h as i64 {
                v.push(ny as usize * w + nx as usize);
            }
        }
    }
    v
}

/// Plain breadth-first search: the pixels of the region containing `seed`, sorted.
pub(crate) fn region_of(labels: &[u16], w: usize, h: usize, seed: usize) -> Vec<usize> {
    let l = labels[seed];
    let mut seen = vec![false; labels.len()];
    let mut queue = std::collections::VecDeque::from([seed]);
    seen[seed] = true;
    let mut out = Vec::new();
    while let Some(p) = queue.pop_front() {
        out.push(p);
        for q in neighbours(p, w, h) {
            if !seen[q] && labels[q] == l {
                seen[q] = true;
                queue.push_back(q);
            }
        }
    }
    out.sort_unstable();
    out
}

/// Reference regions: (label, size, first pixel) by repeated breadth-first search.
pub(crate) fn reference_regions(labels: &[u16], w: usize, h: usize) -> Vec<(u16, usize, usize)> {
    let mut done = vec![false; labels.len()];
    let mut out = Vec::new();
    for p in 0..labels.len() {
        if labels[p] == FIXED || done[p] {
            continue;
        }
        let r = region_of(labels, w, h, p);
        for &q in &r {
            done[q] = true;
        }
        out.push((labels[p], r.len(), p));
    }
    out
}

pub(crate) fn grid(rows: &[&[u16]]) -> (Vec<u16>, usize, usize) {
    let w = rows[0].len();
    (rows.concat(), w, rows.len())
}
