//! Pass 2: every pixel is assigned strip by strip while the class raster is written; the
//! uncertainty rows go over a bounded channel to a second thread that writes the
//! uncertainty raster, so the scene is read and assigned once. Both rasters are written as
//! Cloud-Optimized GeoTIFFs (`raster::geotiff::write_u8_cog`), their tiles waiting in
//! scratch files next to the outputs until each file is assembled.

use super::fit::FittedScene;
use super::preview::PreviewGrid;
use super::stats::ClassStats;
use super::UNCERTAINTY_NODATA;
use crate::error::{Error, Result};
use crate::features::scene::RowReader;
use crate::output::{OutputSet, PendingOutput, ScratchFile};
use crate::raster::geotiff;
use std::fs::File;
use std::io::BufWriter;
use std::sync::mpsc::{sync_channel, Receiver};

/// Strips of uncertainty rows the channel holds before the class pass waits.
const CHANNEL_STRIPS: usize = 4;

/// What pass 2 gathers besides the two rasters.
pub(super) struct Pass2 {
    pub(super) stats: ClassStats,
    pub(super) preview: PreviewGrid,
}

/// Runs pass 2 over `scene`: writes the class raster as `class_name` and the uncertainty
/// raster as `uncertainty_name` into `set`, and returns the statistics and the preview.
pub(super) fn classify_scene(
    scene: &mut FittedScene,
    set: &mut OutputSet,
    class_name: &str,
    uncertainty_name: &str,
) -> Result<Pass2> {
    let (w, h) = (scene.info.width, scene.info.height);
    let geo = &scene.info.geo;
    let fitted = &scene.classes;
    let mut stats = ClassStats::new(fitted.k, fitted.dim);
    let mut preview = PreviewGrid::for_scene(w, h);
    let areas = &scene.areas;
    let mut area_rows: Vec<f64> = Vec::new();
    let mut reader = RowReader::new(&mut scene.raster);
    // One strip: read, assign, sample the preview, add to the statistics.
    let mut strip = |y0: u32, rows: u32| -> Result<(Vec<u8>, Vec<f32>)> {
        let raw = reader.rows(y0, rows)?;
        let assigned = fitted.assign_rows(&raw);
        preview.take_rows(y0, rows, w, &assigned.classes);
        area_rows.clear();
        if areas.is_known() {
            area_rows.resize(rows as usize * w as usize, 0.0);
            for (r, line) in area_rows.chunks_exact_mut(w as usize).enumerate() {
                areas.row_into(y0 + r as u32, line);
            }
        }
        stats.add_rows(fitted, &raw, &assigned, &area_rows, w as usize);
        Ok((assigned.classes, assigned.uncertainty))
    };
    // Both rasters tiled, DEFLATE-compressed with a predictor and overviews, laid out as
    // Cloud-Optimized GeoTIFF; BigTIFF decided from the largest size the files could take,
    // before writing; the class raster carries the preview's colours (class 0, nodata, black).
    let above = bigtiff_above();
    let mut colours = vec![[0u8; 3]];
    colours.extend(super::class_colours(fitted.k));
    let class_opts = geotiff::WriteOptions {
        big: geotiff::cog_size_bound(w, h, 1) > above,
        deflate: true,
        colour_map: Some(colours),
    };
    let unc_opts = geotiff::WriteOptions {
        big: geotiff::cog_size_bound(w, h, 4) > above,
        deflate: true,
        colour_map: None,
    };
    // Each level of each raster keeps its tiles in a scratch file next to the outputs
    // until the file is assembled; the files go on every path (see `OutputSet::scratch`).
    let levels = geotiff::cog_levels(w, h).len();
    let scratch = |name: &str| -> Result<Vec<ScratchFile>> {
        (0..levels).map(|_| set.scratch(name)).collect()
    };
    let unc_scratch = scratch(uncertainty_name)?;
    let mut cls_scratch = scratch(class_name)?;
    let (tx, rx) = sync_channel::<Vec<f32>>(CHANNEL_STRIPS);
    let unc_out = set.begin(uncertainty_name)?;
    let mut cls_out = set.begin(class_name)?;
    let unc_out = std::thread::scope(|scope| -> Result<PendingOutput> {
        let writer = scope
            .spawn(move || write_uncertainty(unc_out, unc_scratch, rx, (w, h), geo, &unc_opts));
        let mut send = |y0: u32, rows: u32| -> Result<Vec<u8>> {
            let (classes, unc) = strip(y0, rows)?;
            tx.send(unc)
                .map_err(|_| Error::Data("the uncertainty writer stopped early".into()))?;
            Ok(classes)
        };
        let band = geotiff::CogBand {
            width: w,
            height: h,
            geo,
            nodata: Some("0"),
            opts: &class_opts,
            description: Some("class (0 = nodata)"),
        };
        let classes_done = write_band(&mut cls_out, |wr| {
            geotiff::write_u8_cog(wr, &band, &mut from(&mut cls_scratch), &mut send)
        });
        drop(tx);
        let unc_done = writer.join().expect("uncertainty writer thread");
        first_cause(classes_done, unc_done)
    })?;
    set.finish(cls_out)?;
    set.finish(unc_out)?;
    Ok(Pass2 { stats, preview })
}

/// The second thread: writes the uncertainty raster from the rows received.
fn write_uncertainty(
    mut out: PendingOutput,
    mut scratch: Vec<ScratchFile>,
    rx: Receiver<Vec<f32>>,
    (w, h): (u32, u32),
    geo: &geotiff::GeoTags,
    opts: &geotiff::WriteOptions,
) -> Result<PendingOutput> {
    let mut buf: Vec<f32> = Vec::new();
    let mut pull = |_y0: u32, rows: u32| -> Result<Vec<f32>> {
        let need = rows as usize * w as usize;
        while buf.len() < need {
            let more = rx
                .recv()
                .map_err(|_| Error::Data("the class pass stopped early".into()))?;
            buf.extend_from_slice(&more);
        }
        Ok(buf.drain(..need).collect())
    };
    let nodata = format!("{UNCERTAINTY_NODATA}");
    let band = geotiff::CogBand {
        width: w,
        height: h,
        geo,
        nodata: Some(&nodata),
        opts,
        description: Some("uncertainty (normalised entropy, 0 = sure, 1 = even)"),
    };
    write_band(&mut out, |wr| {
        geotiff::write_f32_cog(wr, &band, &mut from(&mut scratch), &mut pull)
    })?;
    Ok(out)
}

/// A scratch source handing out the files made for the levels, one per call.
fn from(files: &mut Vec<ScratchFile>) -> impl FnMut() -> Result<Box<dyn geotiff::Scratch>> + '_ {
    move || {
        files
            .pop()
            .map(|f| Box::new(f) as Box<dyn geotiff::Scratch>)
            .ok_or_else(|| {
                Error::Data("a raster asked for more scratch files than it has levels".into())
            })
    }
}

/// The size above which an output raster is written as BigTIFF: [`geotiff::BIGTIFF_ABOVE`],
/// or `CHROMASIFT_BIGTIFF_ABOVE` bytes when that is set (a testing hook: the tests force
/// BigTIFF on small scenes with it rather than writing 4 GiB).
fn bigtiff_above() -> u64 {
    std::env::var("CHROMASIFT_BIGTIFF_ABOVE")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(geotiff::BIGTIFF_ABOVE)
}

/// Writes one raster into `out` and flushes it; a failed flush is reported before a
/// failed write, and a failure of the writer (in the file or one of its scratch files)
/// names the output file.
fn write_band(
    out: &mut PendingOutput,
    write: impl FnOnce(&mut BufWriter<&mut File>) -> Result<()>,
) -> Result<()> {
    let mut result = Ok(());
    out.write_with(|wr| {
        result = write(wr);
        Ok(())
    })?;
    let target = out.target().to_path_buf();
    let writer = std::path::Path::new(geotiff::OUTPUT_NAME);
    result.map_err(|e| match e {
        Error::Io { path, source } if path == writer => Error::io(target, source),
        Error::Output { path, message } if path == writer => Error::output(target, message),
        other => other,
    })
}

/// The outcome of the two writers. When one side fails the other only sees the channel
/// close: report the cause (a full disk, say), not that the other side stopped early.
pub(super) fn first_cause(
    classes: Result<()>,
    uncertainty: Result<PendingOutput>,
) -> Result<PendingOutput> {
    let stopped = |e: &Error| matches!(e, Error::Data(m) if m.ends_with("stopped early"));
    match (classes, uncertainty) {
        (Ok(()), Ok(u)) => Ok(u),
        (Err(e), Err(u)) if stopped(&e) && !stopped(&u) => Err(u),
        (Err(e), _) => Err(e),
        (Ok(()), Err(u)) => Err(u),
    }
}
