//! A 1-bit raster: rows packed eight pixels to a byte, most significant bit first, a set
//! bit is ink (black on the film). This is the sample layout of a TIFF 6.0 bilevel image
//! with PhotometricInterpretation 0 (WhiteIsZero), and, inverted, of a 1-bit PNG.

use crate::error::Result;

/// A 1-bit page (see the module notes for the layout).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Bitmap {
    width: u32,
    height: u32,
    row_bytes: usize,
    bits: Vec<u8>,
}

impl Bitmap {
    /// A clear (no ink) bitmap. Errors when either side is 0 or it would exceed
    /// [`super::MAX_PAGE_PIXELS`].
    pub fn new(width: u32, height: u32) -> Result<Self> {
        if width == 0 || height == 0 {
            return Err(super::bad(format!(
                "a film page of {width} × {height} pixels is empty"
            )));
        }
        let n = width as u64 * height as u64;
        if n > super::MAX_PAGE_PIXELS {
            return Err(super::bad(format!(
                "a film page of {width} × {height} pixels is over the limit of {} pixels; \
                 lower the dpi or the margin",
                super::MAX_PAGE_PIXELS
            )));
        }
        let row_bytes = (width as usize).div_ceil(8);
        Ok(Bitmap {
            width,
            height,
            row_bytes,
            bits: vec![0; row_bytes * height as usize],
        })
    }

    pub fn width(&self) -> u32 {
        self.width
    }

    pub fn height(&self) -> u32 {
        self.height
    }

    /// Bytes per packed row.
    pub fn row_bytes(&self) -> usize {
        self.row_bytes
    }

    /// The packed rows (1 = ink).
    pub fn bytes(&self) -> &[u8] {
        &self.bits
    }

    /// One packed row.
    pub fn row(&self, y: u32) -> &[u8] {
        let s = y as usize * self.row_bytes;
        &self.bits[s..s + self.row_bytes]
    }

    /// Ink at (x, y); outside the page is clear.
    pub fn get(&self, x: i64, y: i64) -> bool {
        if x < 0 || y < 0 || x >= self.width as i64 || y >= self.height as i64 {
            return false;
        }
        let (x, y) = (x as usize, y as usize);
        self.bits[y * self.row_bytes + x / 8] & (0x80 >> (x % 8)) != 0
    }

    /// Sets ink at (x, y); outside the page nothing happens.
    pub fn set(&mut self, x: i64, y: i64, ink: bool) {
        if x < 0 || y < 0 || x >= self.width as i64 || y >= self.height as i64 {
            return;
        }
        let (x, y) = (x as usize, y as usize);
        let b = &mut self.bits[y * self.row_bytes + x / 8];
        if ink {
            *b |= 0x80 >> (x % 8);
        } else {
            *b &= !(0x80 >> (x % 8));
        }
    }

    /// Fills the rectangle from (x0, y0) to (x1, y1), ends excluded, clipped to the page.
    pub fn fill_rect(&mut self, x0: i64, y0: i64, x1: i64, y1: i64, ink: bool) {
        let (x0, x1) = (x0.max(0), x1.min(self.width as i64));
        let (y0, y1) = (y0.max(0), y1.min(self.height as i64));
        for y in y0..y1 {
            for x in x0..x1 {
                self.set(x, y, ink);
            }
        }
    }

    /// Number of ink pixels in a rectangle (clipped to the page).
    pub fn count_ink(&self, x: u32, y: u32, w: u32, h: u32) -> u64 {
        let x1 = (x as u64 + w as u64).min(self.width as u64) as i64;
        let y1 = (y as u64 + h as u64).min(self.height as u64) as i64;
        let mut n = 0;
        for yy in y as i64..y1 {
            for xx in x as i64..x1 {
                n += self.get(xx, yy) as u64;
            }
        }
        n
    }

    /// The page flipped left to right.
    pub fn mirrored(&self) -> Bitmap {
        let mut out = Bitmap {
            width: self.width,
            height: self.height,
            row_bytes: self.row_bytes,
            bits: vec![0; self.bits.len()],
        };
        let w = self.width as i64;
        for y in 0..self.height as i64 {
            for x in 0..w {
                if self.get(x, y) {
                    out.set(w - 1 - x, y, true);
                }
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bits_are_packed_most_significant_first_and_mirror_flips() {
        let mut b = Bitmap::new(10, 2).unwrap();
        b.set(0, 0, true);
        b.set(9, 1, true);
        assert_eq!(b.row_bytes(), 2);
        assert_eq!(b.row(0), &[0x80, 0x00]);
        assert_eq!(b.row(1), &[0x00, 0x40]);
        let m = b.mirrored();
        assert!(m.get(9, 0) && m.get(0, 1));
        assert_eq!(m.count_ink(0, 0, 10, 2), 2);
        assert!(Bitmap::new(0, 5).is_err());
        assert!(Bitmap::new(100_000, 100_000).is_err());
    }
}
