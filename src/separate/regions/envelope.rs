//! The lower envelope of parabolas along one row, for the distance transform of trapping.

use std::ops::{Add, Mul, Sub};

/// Integer type for the lower-envelope arithmetic (`i64` or `i128`).
pub(super) trait EnvelopeInt:
    Copy + PartialOrd + From<i64> + Add<Output = Self> + Sub<Output = Self> + Mul<Output = Self>
{
}
impl EnvelopeInt for i64 {}
impl EnvelopeInt for i128 {}

/// Lower envelope of the parabolas `(x - q)² + g[q]²` of one row (Felzenszwalb & Huttenlocher
/// 2012), in exact integer arithmetic: boundaries are kept as fractions and compared by
/// cross-multiplication.
pub(super) struct Envelope<T> {
    /// Positions q of the parabolas in the envelope, left to right.
    v: Vec<usize>,
    /// g[q]² + q² for each.
    f: Vec<T>,
    /// The boundary from which parabola k is the lowest: zn[k] / zd[k] (zd[k] > 0; unused for k = 0).
    zn: Vec<T>,
    zd: Vec<T>,
}

impl<T> Default for Envelope<T> {
    fn default() -> Self {
        Envelope {
            v: Vec::new(),
            f: Vec::new(),
            zn: Vec::new(),
            zd: Vec::new(),
        }
    }
}

impl<T: EnvelopeInt> Envelope<T> {
    /// Sets `out[x]` for every `x` whose label `m` has `receives(m)` and whose squared distance
    /// to the nearest pixel of the spreading ink, `min over q of (x - q)² + g[q]²`, is at most
    /// `px2`. `g[q] >= cap` means no pixel of the ink within reach in column q.
    pub(super) fn spread_row(
        &mut self,
        g: &[u32],
        cap: u32,
        lab: &[u16],
        receives: impl Fn(u16) -> bool,
        px2: T,
        out: &mut [bool],
    ) {
        self.v.clear();
        self.f.clear();
        self.zn.clear();
        self.zd.clear();
        for (q, &gq) in g.iter().enumerate() {
            if gq >= cap {
                continue;
            }
            let qt = T::from(q as i64);
            let gt = T::from(gq as i64);
            let fq = gt * gt + qt * qt;
            loop {
                let Some(k) = self.v.len().checked_sub(1) else {
                    self.v.push(q);
                    self.f.push(fq);
                    self.zn.push(T::from(0));
                    self.zd.push(T::from(1));
                    break;
                };
                // Where parabola q starts to be lower than the last one: num / den.
                let num = fq - self.f[k];
                let den = T::from(2 * (q - self.v[k]) as i64);
                if k > 0 && num * self.zd[k] <= self.zn[k] * den {
                    // The last parabola is nowhere the lowest.
                    self.v.pop();
                    self.f.pop();
                    self.zn.pop();
                    self.zd.pop();
                    continue;
                }
                self.v.push(q);
                self.f.push(fq);
                self.zn.push(num);
                self.zd.push(den);
                break;
            }
        }
        if self.v.is_empty() {
            return;
        }
        let mut k = 0;
        for (x, (&m, o)) in lab.iter().zip(out.iter_mut()).enumerate() {
            if !receives(m) {
                continue;
            }
            let xt = T::from(x as i64);
            while k + 1 < self.v.len() && self.zn[k + 1] < xt * self.zd[k + 1] {
                k += 1;
            }
            let q = self.v[k];
            let dx = T::from(x as i64 - q as i64);
            let gq = T::from(g[q] as i64);
            if dx * dx + gq * gq <= px2 {
                *o = true;
            }
        }
    }
}
