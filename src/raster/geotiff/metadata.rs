//! GDAL_METADATA (TIFF tag 42112): the per-band scale, offset and description GDAL writes as
//! `<Item name="SCALE" sample="0" role="scale">0.0001</Item>` and the like.

use super::decoder::check_tag_fits;
use crate::error::Result;
use std::io::{Read, Seek};
use std::path::Path;
use tiff::decoder::Decoder;
use tiff::tags::Tag;

/// GDAL_METADATA (ASCII): GDAL's dataset and band metadata as XML.
pub const TAG_GDAL_METADATA: u16 = 42112;

/// What GDAL_METADATA says about each stored sample.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct BandMetadata {
    /// Per stored sample: physical value = stored × scale + offset (1 and 0 when not given).
    pub scale_offset: Vec<(f64, f64)>,
    /// Per stored sample: the band's description, when given.
    pub descriptions: Vec<Option<String>>,
}

fn attribute<'a>(tag: &'a str, name: &str) -> Option<&'a str> {
    let at = tag.find(&format!("{name}=\""))? + name.len() + 2;
    let end = tag[at..].find('"')?;
    Some(&tag[at..at + end])
}

fn unescape(s: &str) -> String {
    s.replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&quot;", "\"")
        .replace("&apos;", "'")
        .replace("&amp;", "&")
}

/// Parses the items of GDAL_METADATA text for `samples` samples. Items with no `sample`
/// attribute (dataset metadata) and unknown names are ignored; a scale or offset that is not
/// a finite number is ignored too.
pub fn parse_gdal_metadata(text: &str, samples: usize) -> BandMetadata {
    let mut m = BandMetadata {
        scale_offset: vec![(1.0, 0.0); samples],
        descriptions: vec![None; samples],
    };
    let mut rest = text;
    while let Some(start) = rest.find("<Item") {
        rest = &rest[start..];
        let Some(close) = rest.find('>') else { break };
        let tag = &rest[..close];
        let Some(end) = rest.find("</Item>") else {
            break;
        };
        let value = unescape(rest[close + 1..end.max(close + 1)].trim());
        rest = &rest[end + 7..];
        let (Some(name), Some(sample)) = (attribute(tag, "name"), attribute(tag, "sample")) else {
            continue;
        };
        let Some(i) = sample.parse::<usize>().ok().filter(|&i| i < samples) else {
            continue;
        };
        let number = value.parse::<f64>().ok().filter(|v| v.is_finite());
        match (name.to_ascii_uppercase().as_str(), number) {
            ("SCALE", Some(v)) => m.scale_offset[i].0 = v,
            ("OFFSET", Some(v)) => m.scale_offset[i].1 = v,
            ("DESCRIPTION", _) if !value.is_empty() => m.descriptions[i] = Some(value),
            _ => {}
        }
    }
    m
}

/// GDAL_METADATA text naming band 1 `description`, in the form GDAL writes (XML, with
/// `&`, `<` and `>` escaped).
pub(super) fn description_text(description: &str) -> String {
    let escaped = description
        .replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;");
    format!(
        "<GDALMetadata>\n  <Item name=\"DESCRIPTION\" sample=\"0\" role=\"description\">{escaped}</Item>\n</GDALMetadata>"
    )
}

pub(super) fn read_gdal_metadata<R: Read + Seek>(
    decoder: &mut Decoder<R>,
    path: &Path,
    samples: usize,
) -> Result<BandMetadata> {
    let tag = Tag::from_u16_exhaustive(TAG_GDAL_METADATA);
    check_tag_fits(decoder, tag, "GDAL_METADATA (42112)", path)?;
    let text = match decoder.find_tag(tag) {
        Ok(Some(v)) => v.into_string().unwrap_or_default(),
        _ => String::new(),
    };
    Ok(parse_gdal_metadata(&text, samples))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn items_by_sample_and_role() {
        // The form GDAL 3.10 writes (see fixtures/rasters/gdal/scale_offset.tif).
        let text = r#"<GDALMetadata>
  <Item name="AREA_OR_POINT">Area</Item>
  <Item name="OFFSET" sample="0" role="offset">-0.10000000000000001</Item>
  <Item name="SCALE" sample="0" role="scale">0.0001</Item>
  <Item name="DESCRIPTION" sample="1" role="description">near &amp; far</Item>
  <Item name="SCALE" sample="7" role="scale">2</Item>
  <Item name="SCALE" sample="1" role="scale">nan</Item>
</GDALMetadata>"#;
        let m = parse_gdal_metadata(text, 2);
        assert_eq!(m.scale_offset, vec![(0.0001, -0.1), (1.0, 0.0)]);
        assert_eq!(m.descriptions, vec![None, Some("near & far".into())]);
    }
}
