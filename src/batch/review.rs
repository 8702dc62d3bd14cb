//! The review page of a batch (`review.html`): before and after thumbnails the batch
//! writes itself (`review/`), each image's palette, ΔE2000 figures and lost-colour
//! warnings, worst first. Every link is relative and nothing is loaded from elsewhere, so
//! the output folder can be moved, copied or shared and the page still opens offline.

use super::{BatchReport, Status};
use crate::error::Result;
use crate::limits::Limits;
use crate::output::OutputSet;
use crate::raster::{self, Decoded, Pixels};
use crate::reduce::PaletteDocument;
use rayon::prelude::*;
use std::fmt::Write as _;
use std::path::Path;

/// The page's file name in the output folder.
pub const REVIEW_PAGE: &str = "review.html";
/// The folder of its thumbnails, beside it.
pub const REVIEW_FOLDER: &str = "review";
/// Longest side of a thumbnail, in pixels.
pub const THUMBNAIL_SIDE: u32 = 240;

fn html_escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// A relative path as a URL: every byte but unreserved characters and `/` percent-encoded
/// (RFC 3986, section 2), so names with spaces, `#` or `?` still link.
fn url_path(p: &Path) -> String {
    let s = p.to_string_lossy().replace('\\', "/");
    let mut out = String::new();
    for b in s.bytes() {
        if b.is_ascii_alphanumeric() || b"-._~/".contains(&b) {
            out.push(b as char);
        } else {
            let _ = write!(out, "%{b:02X}");
        }
    }
    out
}

/// A thumbnail of a decoded image as PNG bytes, keeping its colour profile, upright.
fn thumbnail(img: &Decoded) -> std::io::Result<Vec<u8>> {
    let rgba = match &img.pixels {
        Pixels::Rgba8(p) => p.clone(),
        Pixels::Rgba16(p) => p.iter().map(|&v| ((v as u32 + 128) / 257) as u8).collect(),
    };
    let buf = image::RgbaImage::from_raw(img.width, img.height, rgba)
        .ok_or_else(|| std::io::Error::other("pixel buffer size"))?;
    let scale = THUMBNAIL_SIDE as f64 / img.width.max(img.height).max(1) as f64;
    let (w, h) = if scale < 1.0 {
        (
            ((img.width as f64 * scale).round() as u32).max(1),
            ((img.height as f64 * scale).round() as u32).max(1),
        )
    } else {
        (img.width, img.height)
    };
    let mut small = image::DynamicImage::ImageRgba8(image::imageops::thumbnail(&buf, w, h));
    // Shown the way browsers show the image itself: turned and flipped as its EXIF
    // orientation (tag 274) says.
    if let Some(o) = img
        .exif
        .as_deref()
        .and_then(image::metadata::Orientation::from_exif_chunk)
    {
        small.apply_orientation(o);
    }
    let (w, h) = (small.width(), small.height());
    let small = small.into_rgba8();
    let mut out = Vec::new();
    let extras = raster::PngExtras {
        icc_profile: img
            .icc_profile
            .as_deref()
            .filter(|p| crate::colour::profile::is_rgb_profile(p)),
        ..Default::default()
    };
    raster::write_rgba_png_with(&mut out, w, h, small.as_raw(), &extras)?;
    Ok(out)
}

/// One card's material.
struct Card {
    input: String,
    status: Status,
    error: Option<String>,
    reduced: Option<String>,
    doc: Option<PaletteDocument>,
    /// Thumbnail file names (in `review/`), or why there is none.
    thumbs: std::result::Result<[String; 2], String>,
}

/// Writes the thumbnails into `out/review/` and returns the page. `stems` are the rows'
/// output stems (`None` for a row without outputs).
pub fn review_page(
    r: &BatchReport,
    stems: &[Option<String>],
    input_dir: &Path,
    out: &Path,
    limits: &Limits,
) -> Result<String> {
    let folder = out.join(REVIEW_FOLDER);
    std::fs::create_dir_all(&folder)
        .map_err(|e| crate::Error::output(&folder, format!("cannot create the folder: {e}")))?;
    let made: Vec<(Card, Option<[Vec<u8>; 2]>)> = r
        .files
        .par_iter()
        .zip(stems.par_iter())
        .enumerate()
        .map(|(i, (f, stem))| {
            let rel = Path::new(&f.input);
            let sub = rel.parent().unwrap_or(Path::new(""));
            let ok = matches!(f.status, Status::Ok | Status::Skipped);
            let stem = stem.as_deref().filter(|_| ok);
            let reduced = stem.map(|s| sub.join(format!("{s}.reduced.png")));
            let doc = stem.and_then(|s| {
                let b = std::fs::read(out.join(sub).join(format!("{s}.palette.json"))).ok()?;
                serde_json::from_slice::<PaletteDocument>(&b).ok()
            });
            let pictures =
                reduced
                    .as_ref()
                    .map(|red| -> std::result::Result<[Vec<u8>; 2], String> {
                        let before = raster::decode(&input_dir.join(rel), limits)
                            .map_err(|e| e.to_string())?;
                        let after =
                            raster::decode(&out.join(red), limits).map_err(|e| e.to_string())?;
                        Ok([
                            thumbnail(&before).map_err(|e| e.to_string())?,
                            thumbnail(&after).map_err(|e| e.to_string())?,
                        ])
                    });
            let names = [
                format!("{:04}.before.png", i + 1),
                format!("{:04}.after.png", i + 1),
            ];
            let (thumbs, bytes) = match pictures {
                Some(Ok(b)) => (Ok(names), Some(b)),
                Some(Err(e)) => (Err(e), None),
                None => (Err(String::new()), None),
            };
            let card = Card {
                input: f.input.clone(),
                status: f.status,
                error: f.error.clone(),
                reduced: reduced.map(|p| url_path(&p)),
                doc,
                thumbs,
            };
            (card, bytes)
        })
        .collect();
    let mut set = OutputSet::prepare(&folder, &[])?;
    let mut cards = Vec::with_capacity(made.len());
    for (card, bytes) in made {
        if let (Ok(names), Some(bytes)) = (&card.thumbs, bytes) {
            for (n, b) in names.iter().zip(bytes) {
                set.write_bytes(n, &b)?;
            }
        }
        cards.push(card);
    }
    set.commit()?;
    Ok(page(r, cards))
}

fn page(r: &BatchReport, mut cards: Vec<Card>) -> String {
    let de = |c: &Card| c.doc.as_ref().map(|d| d.mean_delta_e2000);
    // Worst first; images without figures (failed, interrupted) last, in input order.
    cards.sort_by(|a, b| match (de(a), de(b)) {
        (Some(x), Some(y)) => y.total_cmp(&x),
        (Some(_), None) => std::cmp::Ordering::Less,
        (None, Some(_)) => std::cmp::Ordering::Greater,
        (None, None) => std::cmp::Ordering::Equal,
    });
    let mut s = String::from(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
         <meta name=\"viewport\" content=\"width=device-width\"><title>chromasift review</title>\n<style>\
         body{font-family:sans-serif;margin:1em;background:#f4f4f1;color:#222}\
         .card{display:inline-block;vertical-align:top;margin:6px;padding:8px;background:#fff;border:1px solid #ccc;max-width:500px}\
         .pics img{max-width:240px;max-height:240px;min-height:96px;image-rendering:pixelated;margin-right:4px;vertical-align:top}\
         .strip{display:flex;height:16px;margin:6px 0}.strip span{min-width:3px}\
         .warn{color:#8a3b00}.failed{color:#a00}small{color:#555}\
         #state{margin:.5em 0;color:#555}</style></head><body>\n",
    );
    let t = &r.totals;
    let _ = write!(
        s,
        "<h1>{} images</h1><p>{} reduced, {} up to date, {} failed, {} interrupted. \
         Worst mean &Delta;E2000 first. <label>Order: <select id=\"order\">\
         <option value=\"worst\">largest &Delta;E2000 first</option>\
         <option value=\"best\">smallest &Delta;E2000 first</option>\
         <option value=\"name\">file name</option></select></label></p>\
         <p id=\"state\"></p>\n<div id=\"cards\">\n",
        t.files, t.ok, t.skipped, t.failed, t.interrupted
    );
    for c in &cards {
        card(&mut s, c);
    }
    s.push_str("</div>\n<script>\n");
    s.push_str(SCRIPT);
    s.push_str("</script>\n</body></html>\n");
    s
}

fn card(s: &mut String, c: &Card) {
    let de = c.doc.as_ref().map(|d| d.mean_delta_e2000);
    let _ = write!(
        s,
        "<div class=\"card\" data-name=\"{}\" data-de=\"{}\">",
        html_escape(&c.input),
        de.map_or(String::from("-1"), |d| format!("{d:.4}"))
    );
    let name = html_escape(&c.input);
    if !matches!(c.status, Status::Ok | Status::Skipped) {
        let _ = writeln!(
            s,
            "<div class=\"failed\">{name}: {}</div></div>",
            html_escape(c.error.as_deref().unwrap_or("not run"))
        );
        return;
    }
    match (&c.thumbs, &c.reduced) {
        (Ok([before, after]), Some(reduced)) => {
            let _ = write!(
                s,
                "<div class=\"pics\"><img src=\"{REVIEW_FOLDER}/{before}\" alt=\"before: {name}\">\
                 <a href=\"{reduced}\"><img src=\"{REVIEW_FOLDER}/{after}\" alt=\"after: {name}\"></a></div>",
            );
        }
        (Err(e), _) if !e.is_empty() => {
            let _ = write!(
                s,
                "<div class=\"warn\">no preview: {}</div>",
                html_escape(e)
            );
        }
        _ => {}
    }
    let Some(d) = &c.doc else {
        let _ = writeln!(s, "<small>{name}</small></div>");
        return;
    };
    let _ = write!(
        s,
        "<small>{name} &middot; {} colour{} &middot; mean &Delta;E2000 {:.2}",
        d.k,
        if d.k == 1 { "" } else { "s" },
        d.mean_delta_e2000
    );
    if let (Some(p95), Some(p99)) = (d.p95_delta_e2000, d.p99_delta_e2000) {
        let _ = write!(s, " &middot; 95th {p95:.1} &middot; 99th {p99:.1}");
    }
    s.push_str("</small><div class=\"strip\">");
    for col in &d.colors {
        let _ = write!(
            s,
            "<span style=\"background:{};flex-grow:{:.4}\" title=\"{} {:.1}%\"></span>",
            html_escape(&col.hex),
            col.share.max(0.002),
            html_escape(&col.hex),
            col.share * 100.0
        );
    }
    s.push_str("</div>");
    if let Some(a) = d.lost_areas.first() {
        let _ = write!(
            s,
            "<div class=\"warn\">{} area{} lost; the largest, {} pixels at ({}, {}), is {} \
             rendered as {} (&Delta;E2000 {:.1})</div>",
            d.lost_areas.len(),
            if d.lost_areas.len() == 1 { "" } else { "s" },
            a.pixels,
            a.x,
            a.y,
            html_escape(&a.source),
            html_escape(&a.rendered),
            a.delta_e2000
        );
    }
    s.push_str("</div>\n");
}

/// Reorders the cards on request, and says whether every picture was found (after the
/// page is moved without its `review/` folder, it says which are missing).
const SCRIPT: &str = r#"(function () {
  var box = document.getElementById("cards");
  var cards = Array.prototype.slice.call(box.children);
  document.getElementById("order").addEventListener("change", function (ev) {
    var how = ev.target.value;
    cards.sort(function (a, b) {
      if (how === "name") return a.dataset.name < b.dataset.name ? -1 : a.dataset.name > b.dataset.name ? 1 : 0;
      var x = parseFloat(a.dataset.de), y = parseFloat(b.dataset.de);
      if (x < 0 || y < 0) return y - x;
      return how === "best" ? x - y : y - x;
    });
    cards.forEach(function (c) { box.appendChild(c); });
  });
  window.addEventListener("load", function () {
    var imgs = document.querySelectorAll("img");
    var missing = 0;
    for (var i = 0; i < imgs.length; i++) {
      if (!imgs[i].complete || imgs[i].naturalWidth === 0) missing++;
    }
    document.body.dataset.pictures = (imgs.length - missing) + "/" + imgs.length;
    document.getElementById("state").textContent = missing === 0
      ? "All " + imgs.length + " pictures found."
      : missing + " of " + imgs.length + " pictures are missing: keep the review folder beside review.html.";
  });
})();
"#;
