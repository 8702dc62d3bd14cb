//! The one place an image's pixels become histogram entries: every command that takes an
//! image's colours (`reduce`, `apply`, `batch`, `learn`, `histogram`, `sweep`, `separate`)
//! counts them here, and the entries are read through the image's embedded ICC profile.

use crate::colour::profile::{read_profile, ProfileUse};
use crate::features::histogram::{self, Histogram, IndexedHistogram};
use crate::raster::{Decoded, Pixels};
use serde::{Deserialize, Serialize};

/// An image's colours: the entries (with each pixel's entry) and its embedded profile as
/// read (`None`: untagged).
pub struct ImageColours {
    pub indexed: IndexedHistogram,
    pub profile: Option<ProfileUse>,
}

/// How one input's colours were read, for the documents of commands with many inputs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InputProfile {
    /// The input (as given, or its path inside a batch's folder).
    pub file: String,
    /// As a palette document's `colour_profile.input`: `icc` (converted through the
    /// embedded profile), `icc-srgb` (an embedded profile that matches sRGB), `icc-unused`
    /// (a profile that cannot be applied: read as sRGB) or `untagged` (read as sRGB, as is
    /// common practice); or `histogram-file` for a histogram file.
    pub input: String,
    /// The embedded profile's description, when there is one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub description: Option<String>,
    /// Why an embedded profile was not applied (`icc-unused`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
    /// For a histogram file: the profiles (other than sRGB) its colours are in.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub profiles: Vec<String>,
}

/// What an embedded profile (as read) records: (`input`, description, note); see
/// [`InputProfile`].
pub fn profile_kind(read: Option<&ProfileUse>) -> (&'static str, Option<String>, Option<String>) {
    match read {
        None => ("untagged", None, None),
        Some(ProfileUse::Srgb(d)) => ("icc-srgb", Some(d.clone()), None),
        Some(ProfileUse::Convert(p)) => ("icc", Some(p.description.clone()), None),
        Some(ProfileUse::Unused(why)) => (
            "icc-unused",
            None,
            Some(format!("{why}; the image is read as sRGB")),
        ),
    }
}

impl InputProfile {
    /// The record of an image read by [`image_colours`].
    pub fn of_image(file: String, read: Option<&ProfileUse>) -> InputProfile {
        let (input, description, note) = profile_kind(read);
        InputProfile {
            file,
            input: input.into(),
            description,
            note,
            profiles: Vec::new(),
        }
    }

    /// The record of a histogram file.
    pub fn of_histogram_file(file: String, h: &Histogram) -> InputProfile {
        InputProfile {
            file,
            input: "histogram-file".into(),
            description: None,
            note: None,
            profiles: h.profiles.iter().map(|p| p.description.clone()).collect(),
        }
    }
}

/// The colours of a decoded image at its own depth, read through its embedded profile.
pub fn image_colours(img: &Decoded) -> ImageColours {
    let indexed = match &img.pixels {
        Pixels::Rgba8(p) => histogram::from_rgba8(p),
        Pixels::Rgba16(p) => histogram::from_rgba16(p),
    };
    with_profile(indexed, img)
}

/// As [`image_colours`], a 16-bit image brought to 8 bits first, so that the images of a
/// folder share one table (`learn`, `histogram`, `batch --shared`).
pub fn image_colours_8bit(img: &Decoded) -> ImageColours {
    let indexed = match &img.pixels {
        Pixels::Rgba8(p) => histogram::from_rgba8(p),
        Pixels::Rgba16(p) => {
            let p8: Vec<u8> = p.iter().map(|&v| ((v as u32 + 128) / 257) as u8).collect();
            histogram::from_rgba8(&p8)
        }
    };
    with_profile(indexed, img)
}

fn with_profile(indexed: IndexedHistogram, img: &Decoded) -> ImageColours {
    let profile = img.icc_profile.as_deref().map(read_profile).or_else(|| {
        // A profile present but not readable from the file is recorded as one not applied.
        img.icc_unreadable.clone().map(ProfileUse::Unused)
    });
    let convert = match &profile {
        Some(ProfileUse::Convert(p)) => Some(p.clone()),
        _ => None,
    };
    let IndexedHistogram {
        histogram,
        pixel_entry,
    } = indexed;
    ImageColours {
        indexed: IndexedHistogram {
            histogram: histogram.read_through(convert),
            pixel_entry,
        },
        profile,
    }
}
