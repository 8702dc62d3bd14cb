//! Transparency: how a pixel's alpha changes the ink a plate prints there.

use crate::error::Result;

use super::bad;

/// How partial transparency is treated.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum AlphaRule {
    /// A pixel whose alpha is below this share of opaque (0..=1) gets no ink; at or above
    /// it keeps its amount. Default: 0.5 (50 %, common practice).
    Threshold(f64),
    /// The amount is scaled by alpha / 255, so soft edges and see-through fills become
    /// tints (halftone dots when halftones are on).
    Tint,
}

impl Default for AlphaRule {
    fn default() -> Self {
        AlphaRule::Threshold(0.5)
    }
}

impl AlphaRule {
    pub fn check(&self) -> Result<()> {
        if let AlphaRule::Threshold(t) = *self {
            if !(t.is_finite() && (0.0..=1.0).contains(&t)) {
                return Err(bad(format!(
                    "the alpha threshold must be between 0 and 1 (0 % and 100 %; got {t})"
                )));
            }
        }
        Ok(())
    }
}

/// What [`apply_alpha`] did, in pixels (summed over plates by [`super::make_films`]).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct AlphaNote {
    /// Inked pixels whose alpha was neither 0 nor 255.
    pub partial: u64,
    /// Inked pixels that lost their ink (below the threshold).
    pub dropped: u64,
    /// Inked partial pixels that kept their amount (at or above the threshold).
    pub kept: u64,
    /// Inked partial pixels whose amount was scaled ([`AlphaRule::Tint`]).
    pub scaled: u64,
}

impl AlphaNote {
    pub fn add(&mut self, o: &AlphaNote) {
        self.partial += o.partial;
        self.dropped += o.dropped;
        self.kept += o.kept;
        self.scaled += o.scaled;
    }

    /// A plain sentence for the run's notes.
    pub fn describe(&self, rule: AlphaRule, plates: usize) -> String {
        match rule {
            AlphaRule::Threshold(t) => format!(
                "transparency: alpha threshold {} %; over {plates} plate(s), {} inked pixels \
                 were partly transparent: {} below the threshold print no ink, {} print as \
                 if opaque",
                super::screen::trim_number(t * 100.0),
                self.partial,
                self.dropped,
                self.kept
            ),
            AlphaRule::Tint => format!(
                "transparency: ink scaled by alpha; over {plates} plate(s), {} partly \
                 transparent inked pixels became tints ({} fully transparent ones print no ink)",
                self.scaled, self.dropped
            ),
        }
    }
}

/// Applies `rule` to one plate's amounts, with one alpha value per pixel.
pub fn apply_alpha(amount: &mut [u8], alpha: &[u8], rule: AlphaRule) -> Result<AlphaNote> {
    rule.check()?;
    if amount.len() != alpha.len() {
        return Err(bad(format!(
            "the alpha channel has {} values but the plate has {} pixels",
            alpha.len(),
            amount.len()
        )));
    }
    let mut note = AlphaNote::default();
    for (a, &al) in amount.iter_mut().zip(alpha) {
        if *a == 0 {
            continue;
        }
        let partial = al != 0 && al != 255;
        note.partial += partial as u64;
        match rule {
            AlphaRule::Threshold(t) => {
                // Alpha below t × 255 prints nothing; at or above, the amount stays.
                if (al as f64) < t * 255.0 {
                    *a = 0;
                    note.dropped += 1;
                } else if partial {
                    note.kept += 1;
                }
            }
            AlphaRule::Tint => {
                if al == 0 {
                    *a = 0;
                    note.dropped += 1;
                } else if partial {
                    *a = ((*a as u32 * al as u32 + 127) / 255) as u8;
                    note.scaled += 1;
                }
            }
        }
    }
    Ok(note)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn threshold_and_tint() {
        let alpha = [0u8, 100, 127, 128, 200, 255];
        let mut a = [255u8; 6];
        let n = apply_alpha(&mut a, &alpha, AlphaRule::default()).unwrap();
        // 127.5 is the 50 % point: 127 is below it, 128 is not.
        assert_eq!(a, [0, 0, 0, 255, 255, 255]);
        assert_eq!((n.partial, n.dropped, n.kept), (4, 3, 2));
        let mut a = [255u8; 6];
        apply_alpha(&mut a, &alpha, AlphaRule::Tint).unwrap();
        assert_eq!(a, [0, 100, 127, 128, 200, 255]);
        assert!(apply_alpha(&mut a, &alpha[..2], AlphaRule::Tint).is_err());
        assert!(apply_alpha(&mut a, &alpha, AlphaRule::Threshold(1.5)).is_err());
    }
}
