//! Every bad input the binary must refuse, for every command, in one table; then
//! headers that claim huge images, refused by every decoder before any pixel buffer.
//!
//! Each row must end with exit status 2, one short line on standard error that names the
//! file (where there is one) and the problem, no panic, and the folder it ran in exactly
//! as it was: no partial outputs, no temporary files, inputs untouched.

mod common;

use common::{assert_refusal, check_refusal, everything_under, png_chunk, run, write_rgb};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

/// The folder every row runs in, with good and bad inputs.
struct Scene {
    _dir: tempfile::TempDir,
    root: PathBuf,
}

impl Scene {
    fn p(&self, name: &str) -> String {
        self.root.join(name).to_str().unwrap().to_string()
    }
    fn write(&self, name: &str, bytes: &[u8]) {
        std::fs::write(self.root.join(name), bytes).unwrap();
    }
}

/// A small GeoTIFF (one 8-bit band) with the given georeferencing tags.
fn write_geotiff(path: &Path, tags: &[(u16, GeoValue)]) {
    use tiff::encoder::{colortype, TiffEncoder};
    use tiff::tags::Tag;
    let file = std::fs::File::create(path).unwrap();
    let mut enc = TiffEncoder::new(file).unwrap();
    let mut img = enc.new_image::<colortype::Gray8>(8, 6).unwrap();
    for (tag, value) in tags {
        let t = Tag::Unknown(*tag);
        match value {
            GeoValue::Doubles(v) => img.encoder().write_tag(t, &v[..]).unwrap(),
            GeoValue::Shorts(v) => img.encoder().write_tag(t, &v[..]).unwrap(),
            GeoValue::Text(s) => img.encoder().write_tag(t, &s[..]).unwrap(),
        }
    }
    let px: Vec<u8> = (0..48u8).map(|i| i * 5).collect();
    img.write_data(&px).unwrap();
}

enum GeoValue {
    Doubles(Vec<f64>),
    Shorts(Vec<u16>),
    Text(String),
}

const PIXEL_SCALE: u16 = 33550;
const TIEPOINT: u16 = 33922;
const TRANSFORMATION: u16 = 34264;
const KEY_DIRECTORY: u16 = 34735;
const GDAL_NODATA: u16 = 42113;

/// GeoKeyDirectory of a projected CRS, WGS 84 / UTM zone 33N (EPSG 32633), in metres
/// (OGC GeoTIFF 1.1, §7.1: header 1,1,0,N then N keys of 4 values).
fn utm_keys() -> Vec<u16> {
    vec![
        1, 1, 0, 4, 1024, 0, 1, 1, 1025, 0, 1, 1, 3072, 0, 1, 32633, 3076, 0, 1, 9001,
    ]
}

fn scene() -> Scene {
    let dir = tempfile::tempdir().unwrap();
    let root = dir.path().to_path_buf();
    let s = Scene { _dir: dir, root };
    // A good 16 × 12 RGB image and the encodings cut short.
    let rgb = common::gradient(16, 12, [20, 60, 160], [240, 200, 40]);
    write_rgb(&s.root.join("good.png"), 16, 12, &rgb);
    let png = std::fs::read(s.root.join("good.png")).unwrap();
    s.write("cut.png", &png[..png.len() / 2]);
    let encode = |format: image::ImageFormat| {
        let mut v = std::io::Cursor::new(Vec::new());
        image::RgbImage::from_raw(16, 12, rgb.clone())
            .unwrap()
            .write_to(&mut v, format)
            .unwrap();
        v.into_inner()
    };
    let jpeg = encode(image::ImageFormat::Jpeg);
    s.write("cut.jpg", &jpeg[..jpeg.len() / 2]);
    let tif = encode(image::ImageFormat::Tiff);
    s.write("cut.tif", &tif[..tif.len() / 2]);
    // A JPEG cut inside its scan data, where the decoder itself would fill the rest with
    // grey: a 64 × 48 ripple (ours) cut at 85 % of its bytes.
    let ripple: Vec<u8> = (0..64 * 48 * 3)
        .map(|i| ((i * 37 + (i / 192) * 11) % 251) as u8)
        .collect();
    let mut v = std::io::Cursor::new(Vec::new());
    image::RgbImage::from_raw(64, 48, ripple)
        .unwrap()
        .write_to(&mut v, image::ImageFormat::Jpeg)
        .unwrap();
    let jpeg = v.into_inner();
    s.write("scan-cut.jpg", &jpeg[..jpeg.len() * 85 / 100]);
    // A name whose outputs would pass the 255-byte limit of common file systems.
    std::fs::copy(
        s.root.join("good.png"),
        s.root.join(format!("{}.png", "n".repeat(240))),
    )
    .unwrap();
    s.write("words.png", b"these are words, not pixels\n");
    s.write("empty.png", b"");
    s.write("bomb.png", &huge_png(100_000, 100_000));
    s.write("bomb.tif", &huge_tiff(100_000, 100_000));
    // Within the pixel limit, but its one strip runs far past the end of the file.
    s.write("hollow.tif", &huge_tiff(8_000, 8_000));
    std::fs::create_dir(s.root.join("out")).unwrap();
    std::fs::write(s.root.join("taken"), b"keep me").unwrap();
    // The output would land on the input: a link named like an output, to the input.
    std::fs::create_dir(s.root.join("linked")).unwrap();
    std::os::unix::fs::symlink(
        s.root.join("good.png"),
        s.root.join("linked/good.palette.json"),
    )
    .unwrap();

    // Ink libraries, each broken in one way.
    s.write(
        "inks-good.csv",
        b"name,hex\nChalk,#ffffff\nNight,#101820\nSea,#1f4e8c\nSun,#f0d020\nLeaf,#3c8c3c\n",
    );
    s.write(
        "inks-number.csv",
        b"name,L,a,b\nChalk,95,0,2\nNight,1O,0,0\n",
    );
    s.write("inks-columns.csv", b"name,colour\nChalk,white\n");
    s.write("inks-ragged.csv", b"name,L,a,b\nChalk,95,0\n");
    s.write("inks-range.csv", b"name,L,a,b\nChalk,150,0,2\n");
    s.write(
        "inks-duplicate.csv",
        b"name,hex\nChalk,#ffffff\nchalk,#eeeeee\n",
    );
    s.write("inks-quote.csv", b"name,hex\n\"Chalk,#ffffff\n");
    s.write("inks-hex.csv", b"name,hex\nChalk,#fffff\n");
    s.write("inks-latin1.csv", b"name,hex\nCr\xe8me,#fff8e0\n");
    s.write("inks-none.csv", b"# nothing here\nname,L,a,b\n");
    s.write("inks-broken.json", b"[{\"name\": \"Chalk\", \"L\": 95,");
    s.write(
        "inks-object.json",
        b"[{\"name\": \"Chalk\", \"L\": 95, \"a\": 0, \"b\": \"two\"}]",
    );
    s.write("inks-fields.json", b"[{\"name\": \"Chalk\"}]");
    s.write("inks-item.json", b"[42]");
    s.write(
        "inks-wrapped.json",
        b"{\"inks\": [{\"name\": \"Chalk\", \"hex\": \"#ffffff\"}]}",
    );
    s.write("array.palette.json", b"[]");

    // Palette documents: a good one from `reduce`, then broken copies.
    let o = run(
        &["reduce", &s.p("good.png"), "-k", "3", "-o", &s.p("pal")],
        &[],
    );
    assert!(o.status.success(), "{}", common::stderr(&o));
    let good = std::fs::read_to_string(s.root.join("pal/good.palette.json")).unwrap();
    s.write("cut.palette.json", &good.as_bytes()[..good.len() / 2]);
    let mut doc: serde_json::Value = serde_json::from_str(&good).unwrap();
    doc["colors"][0]["hex"] = "#12345".into();
    s.write("badhex.palette.json", doc.to_string().as_bytes());
    doc["colors"] = serde_json::json!([]);
    s.write("nocolours.palette.json", doc.to_string().as_bytes());
    doc["space"] = "hsv".into();
    s.write("space.palette.json", doc.to_string().as_bytes());
    s.write("image.palette.json", &png);

    // Histogram files: a good one from `histogram`, then damaged and foreign ones.
    let o = run(
        &["histogram", &s.p("good.png"), "-o", &s.p("good.hist")],
        &[],
    );
    assert!(o.status.success(), "{}", common::stderr(&o));
    let hist = std::fs::read(s.root.join("good.hist")).unwrap();
    let mut v = hist.clone();
    v[40] ^= 0x10;
    s.write("damaged.hist", &v);
    let mut v = hist.clone();
    v[7] = 4;
    s.write("v4.hist", &v);
    s.write("cut.hist", &hist[..hist.len() - 5]);
    s.write("foreign.hist", b"%PDF-1.4\n% not a histogram\n");
    s.write("words.hist", b"CSHISTOGRAM, but in words\n");

    // Rasters for `landcover`: three bands, and broken georeferencing.
    s.write("scene.tif", &tif);
    let geo = |name: &str, tags: Vec<(u16, GeoValue)>| write_geotiff(&s.root.join(name), &tags);
    let scale = || (PIXEL_SCALE, GeoValue::Doubles(vec![10.0, 10.0, 0.0]));
    let tie = || {
        (
            TIEPOINT,
            GeoValue::Doubles(vec![0.0, 0.0, 0.0, 500_000.0, 5_000_000.0, 0.0]),
        )
    };
    let keys = || (KEY_DIRECTORY, GeoValue::Shorts(utm_keys()));
    geo("geo-ok.tif", vec![scale(), tie(), keys()]);
    geo(
        "geo-keycount.tif",
        vec![
            scale(),
            tie(),
            (KEY_DIRECTORY, GeoValue::Shorts(utm_keys()[..12].to_vec())),
        ],
    );
    geo(
        "geo-tiepoint.tif",
        vec![
            scale(),
            (
                TIEPOINT,
                GeoValue::Doubles(vec![0.0, 0.0, 0.0, 500_000.0, 5_000_000.0]),
            ),
            keys(),
        ],
    );
    geo(
        "geo-negative.tif",
        vec![
            (PIXEL_SCALE, GeoValue::Doubles(vec![10.0, -10.0, 0.0])),
            tie(),
            keys(),
        ],
    );
    let mut m = vec![0.0; 16];
    m[0] = 10.0;
    m[5] = -10.0;
    m[15] = 1.0;
    geo(
        "geo-ambiguous.tif",
        vec![
            scale(),
            tie(),
            (TRANSFORMATION, GeoValue::Doubles(m)),
            keys(),
        ],
    );
    let mut keys_v = utm_keys();
    keys_v[0] = 2;
    geo(
        "geo-version.tif",
        vec![scale(), tie(), (KEY_DIRECTORY, GeoValue::Shorts(keys_v))],
    );
    geo(
        "geo-nodata.tif",
        vec![
            scale(),
            tie(),
            keys(),
            (GDAL_NODATA, GeoValue::Text("none".into())),
        ],
    );
    std::fs::create_dir(s.root.join("shoot")).unwrap();
    std::fs::copy(s.root.join("good.png"), s.root.join("shoot/a.png")).unwrap();
    s
}

/// One row: a name, the arguments, and what the message must contain.
type Row = (&'static str, Vec<String>, Vec<String>);

fn rows(s: &Scene) -> Vec<Row> {
    let out = s.p("out");
    let new_out = s.p("new-out");
    let good = s.p("good.png");
    let scene = s.p("scene.tif");
    let mut rows: Vec<Row> = Vec::new();
    let mut add = |name: &'static str, args: &[&str], expect: &[&str]| {
        rows.push((
            name,
            args.iter().map(|a| a.to_string()).collect(),
            expect.iter().map(|a| a.to_string()).collect(),
        ));
    };

    // ---- reduce: every input problem, every parameter rule, every output problem ----
    add(
        "reduce missing file",
        &["reduce", &s.p("missing.png"), "-o", &new_out],
        &["missing.png", "cannot open"],
    );
    add(
        "reduce not an image",
        &["reduce", &s.p("words.png"), "-o", &new_out],
        &["words.png", "not an image"],
    );
    add(
        "reduce empty file",
        &["reduce", &s.p("empty.png"), "-o", &new_out],
        &["empty.png", "empty"],
    );
    add(
        "reduce a folder",
        &["reduce", &s.p("shoot"), "-o", &new_out],
        &["shoot", "folder"],
    );
    add(
        "reduce endless device",
        &["reduce", "/dev/zero", "-o", &new_out],
        &["/dev/zero", "not an image"],
    );
    add(
        "reduce truncated PNG",
        &["reduce", &s.p("cut.png"), "-o", &new_out],
        &["cut.png"],
    );
    add(
        "reduce truncated JPEG",
        &["reduce", &s.p("cut.jpg"), "-o", &new_out],
        &["cut.jpg"],
    );
    add(
        "reduce truncated TIFF",
        &["reduce", &s.p("cut.tif"), "-o", &new_out],
        &["cut.tif"],
    );
    add(
        "reduce JPEG cut inside its scan",
        &["reduce", &s.p("scan-cut.jpg"), "-o", &new_out],
        &["scan-cut.jpg", "end-of-image"],
    );
    let long = s.p(&format!("{}.png", "n".repeat(240)));
    add(
        "reduce output names too long",
        &["reduce", &long, "-o", &new_out],
        &["file name is", "255"],
    );
    add(
        "reduce negative k after a space",
        &["reduce", &good, "-k", "-3", "-o", &new_out],
        &["'-3'", "--k"],
    );
    add(
        "reduce multi-band raster",
        &[
            "reduce",
            common::fixture("rasters/utm_u16_4band_lzw.tif")
                .to_str()
                .unwrap(),
            "-o",
            &new_out,
        ],
        &["utm_u16_4band_lzw.tif", "landcover"],
    );
    add(
        "histogram output over its input",
        &["histogram", &good, "-o", &good],
        &["good.png", "overwrite the input"],
    );
    add(
        "learn output over its input",
        &["learn", &s.p("good.hist"), "-o", &s.p("good.hist")],
        &["good.hist", "overwrite the input"],
    );
    add(
        "apply output over its palette",
        &[
            "apply",
            &good,
            "--palette",
            &s.p("pal/good.palette.json"),
            "-o",
            &s.p("pal"),
        ],
        &["good.palette.json", "overwrite the input"],
    );
    add(
        "landcover strip past the end of the file",
        &["landcover", &s.p("hollow.tif"), "-o", &new_out],
        &["hollow.tif", "ends early", "spans bytes"],
    );
    add(
        "landcover band listed twice",
        &["landcover", &scene, "--bands", "1,1", "-o", &new_out],
        &["band 1", "twice"],
    );
    add(
        "landcover index of one band with itself",
        &["landcover", &scene, "--index", "ndvi:2,2", "-o", &new_out],
        &["ndvi:2,2", "twice"],
    );
    add(
        "landcover the same index twice",
        &[
            "landcover",
            &scene,
            "--index",
            "nd:1,2",
            "--index",
            "ndvi:2,1",
            "-o",
            &new_out,
        ],
        &["ndvi:2,1", "repeats bands"],
    );
    add(
        "landcover empty sample",
        &["landcover", &scene, "--sample", "0", "-o", &new_out],
        &["--sample", "at least 1"],
    );
    add(
        "landcover more classes than the class raster holds",
        &["landcover", &scene, "-k", "256", "-o", &new_out],
        &["k must be at most 255 (got 256)", "8-bit class raster"],
    );
    add(
        "reduce --k-max without a target",
        &["reduce", &good, "--k-max", "5", "-o", &new_out],
        &["--target-delta-e"],
    );
    add(
        "reduce annealing schedule without --anneal",
        &["reduce", &good, "--anneal-factor", "2", "-o", &new_out],
        &["--anneal"],
    );
    add(
        "reduce negative split-and-merge moves",
        &["reduce", &good, "--split-merge", "-1", "-o", &new_out],
        &["'-1'", "--split-merge"],
    );
    add(
        "batch without an output folder",
        &["batch", &s.p("shoot")],
        &["required", "--out"],
    );
    add(
        "batch too many jobs",
        &["batch", &s.p("shoot"), "--jobs", "100000", "-o", &new_out],
        &["--jobs", "100000"],
    );
    add(
        "reduce decompression bomb",
        &["reduce", &s.p("bomb.png"), "-o", &new_out],
        &["bomb.png", "over the limit"],
    );
    add(
        "reduce k 0",
        &["reduce", &good, "-k", "0", "-o", &new_out],
        &["k must be at least 1"],
    );
    add(
        "reduce k not a number",
        &["reduce", &good, "-k", "six", "-o", &new_out],
        &["six", "--k"],
    );
    for beta in ["0", "-1", "nan", "inf", "-inf", "1e999"] {
        add(
            "reduce bad beta",
            &[
                "reduce", &good, "--mode", "soft", "--beta", beta, "-o", &new_out,
            ],
            &["beta must be a positive finite number"],
        );
    }
    add(
        "reduce beta not a number",
        &["reduce", &good, "--beta", "sharp", "-o", &new_out],
        &["sharp", "beta"],
    );
    add(
        "reduce tolerance NaN",
        &["reduce", &good, "--tolerance", "nan", "-o", &new_out],
        &["tolerance"],
    );
    add(
        "reduce max-iter 0",
        &["reduce", &good, "--max-iter", "0", "-o", &new_out],
        &["max-iter"],
    );
    add(
        "reduce restarts 0",
        &["reduce", &good, "--restarts", "0", "-o", &new_out],
        &["restarts"],
    );
    add(
        "reduce unknown space",
        &["reduce", &good, "--space", "hsv", "-o", &new_out],
        &["hsv"],
    );
    add(
        "reduce output is a file",
        &["reduce", &good, "-o", &s.p("taken")],
        &["taken", "not a folder"],
    );
    add(
        "reduce output under a file",
        &["reduce", &good, "-o", &s.p("taken/sub")],
        &["taken", "cannot use output folder"],
    );
    add(
        "reduce output would overwrite the input",
        &["reduce", &good, "-o", &s.p("linked")],
        &["good.palette.json", "overwrite the input"],
    );

    // ---- separate: the artwork and every kind of broken ink library ----
    for (name, lib, problem) in [
        (
            "separate missing library",
            "no-inks.csv",
            &["cannot open"][..],
        ),
        (
            "separate CSV bad number",
            "inks-number.csv",
            &["line 3", "'1O' is not a number"],
        ),
        (
            "separate CSV no colour columns",
            "inks-columns.csv",
            &["line 1", "L,a,b or hex"],
        ),
        (
            "separate CSV ragged row",
            "inks-ragged.csv",
            &["line 2", "expected 4 fields"],
        ),
        (
            "separate CSV L out of range",
            "inks-range.csv",
            &["line 2", "outside 0..100"],
        ),
        (
            "separate CSV duplicate name",
            "inks-duplicate.csv",
            &["line 3", "duplicate ink name"],
        ),
        (
            "separate CSV open quote",
            "inks-quote.csv",
            &["line 2", "not closed"],
        ),
        (
            "separate CSV bad hex",
            "inks-hex.csv",
            &["line 2", "#rrggbb"],
        ),
        ("separate CSV not UTF-8", "inks-latin1.csv", &["not UTF-8"]),
        ("separate CSV no inks", "inks-none.csv", &["no inks"]),
        (
            "separate JSON cut short",
            "inks-broken.json",
            &["not valid JSON"],
        ),
        (
            "separate JSON field not a number",
            "inks-object.json",
            &["entry 1", "'b' is not a number"],
        ),
        (
            "separate JSON missing fields",
            "inks-fields.json",
            &["entry 1", "needs L, a, b or hex"],
        ),
        (
            "separate JSON entry not an object",
            "inks-item.json",
            &["entry 1", "not an object"],
        ),
        (
            "separate JSON library that is an object",
            "inks-wrapped.json",
            &["array of inks", "not an object"],
        ),
    ] {
        let mut expect = vec![lib];
        expect.extend_from_slice(problem);
        add(
            name,
            &["separate", &good, "--inks", &s.p(lib), "-o", &new_out],
            &expect,
        );
    }
    let lib = s.p("inks-good.csv");
    add(
        "separate missing artwork",
        &[
            "separate",
            &s.p("missing.png"),
            "--inks",
            &lib,
            "-o",
            &new_out,
        ],
        &["missing.png", "cannot open"],
    );
    add(
        "separate truncated artwork",
        &["separate", &s.p("cut.jpg"), "--inks", &lib, "-o", &new_out],
        &["cut.jpg"],
    );
    add(
        "separate bad substrate",
        &[
            "separate",
            &good,
            "--inks",
            &lib,
            "--substrate",
            "white",
            "-o",
            &new_out,
        ],
        &["white", "#rrggbb"],
    );

    // ---- landcover: rasters, band lists, index specs, georeferencing ----
    add(
        "landcover missing raster",
        &["landcover", &s.p("missing.tif"), "-o", &new_out],
        &["missing.tif", "cannot open"],
    );
    add(
        "landcover not a raster",
        &["landcover", &s.p("words.png"), "-o", &new_out],
        &["words.png", "not an image"],
    );
    add(
        "landcover truncated TIFF",
        &["landcover", &s.p("cut.tif"), "-o", &new_out],
        &["cut.tif"],
    );
    add(
        "landcover decompression bomb",
        &["landcover", &s.p("bomb.tif"), "-o", &new_out],
        &["bomb.tif", "over the limit"],
    );
    add(
        "landcover k 0",
        &["landcover", &scene, "-k", "0", "-o", &new_out],
        &["k must be at least 1"],
    );
    add(
        "landcover soft beta NaN",
        &[
            "landcover",
            &scene,
            "--mode",
            "soft",
            "--beta",
            "nan",
            "-o",
            &new_out,
        ],
        &["beta must be a positive finite number"],
    );
    add(
        "landcover band beyond the raster",
        &["landcover", &scene, "--bands", "2,5", "-o", &new_out],
        &["scene.tif", "band 5", "3 bands"],
    );
    add(
        "landcover band 0",
        &["landcover", &scene, "--bands", "0", "-o", &new_out],
        &["'0' is not a band number"],
    );
    add(
        "landcover band list with a word",
        &["landcover", &scene, "--bands", "1,red", "-o", &new_out],
        &["'red' is not a band number"],
    );
    add(
        "landcover empty band list",
        &["landcover", &scene, "--bands", "", "-o", &new_out],
        &["--bands"],
    );
    add(
        "landcover band list trailing comma",
        &["landcover", &scene, "--bands", "1,2,", "-o", &new_out],
        &["is not a band number"],
    );
    add(
        "landcover index with one band",
        &["landcover", &scene, "--index", "ndvi:3", "-o", &new_out],
        &["ndvi:3", "two bands"],
    );
    add(
        "landcover unknown index",
        &["landcover", &scene, "--index", "evi:1,2", "-o", &new_out],
        &["unknown index 'evi'"],
    );
    add(
        "landcover index without kind",
        &["landcover", &scene, "--index", "1,2", "-o", &new_out],
        &["ndvi:RED,NIR"],
    );
    add(
        "landcover index band beyond the raster",
        &["landcover", &scene, "--index", "ndvi:1,9", "-o", &new_out],
        &["scene.tif", "band 9"],
    );
    add(
        "landcover nodata not a number",
        &["landcover", &scene, "--nodata", "none", "-o", &new_out],
        &["none", "--nodata"],
    );
    add(
        "landcover unknown scaling",
        &["landcover", &scene, "--scale", "minmax", "-o", &new_out],
        &["minmax"],
    );
    for (name, file, problem) in [
        (
            "landcover GeoKeyDirectory count",
            "geo-keycount.tif",
            "declares 4 keys",
        ),
        (
            "landcover ModelTiepoint length",
            "geo-tiepoint.tif",
            "ModelTiepoint has 5 values",
        ),
        (
            "landcover negative pixel size",
            "geo-negative.tif",
            "must be > 0",
        ),
        (
            "landcover two georeferencings",
            "geo-ambiguous.tif",
            "ambiguous",
        ),
        (
            "landcover GeoKeyDirectory version",
            "geo-version.tif",
            "version is 2",
        ),
        (
            "landcover GDAL_NODATA not a number",
            "geo-nodata.tif",
            "GDAL_NODATA",
        ),
    ] {
        add(
            name,
            &["landcover", &s.p(file), "-o", &new_out],
            &[file, problem],
        );
    }

    // ---- apply: broken palette documents ----
    for (name, file, problem) in [
        ("apply missing palette", "no.palette.json", "cannot open"),
        (
            "apply palette cut short",
            "cut.palette.json",
            "not a palette document",
        ),
        (
            "apply palette with a bad colour",
            "badhex.palette.json",
            "#rrggbb",
        ),
        (
            "apply palette with no colours",
            "nocolours.palette.json",
            "no colours",
        ),
        (
            "apply palette with unknown space",
            "space.palette.json",
            "not a palette document",
        ),
        (
            "apply palette that is an image",
            "image.palette.json",
            "not a palette document",
        ),
    ] {
        add(
            name,
            &["apply", &good, "--palette", &s.p(file), "-o", &new_out],
            &[file, problem],
        );
    }
    let pal = s.p("pal/good.palette.json");
    add(
        "apply missing image",
        &[
            "apply",
            &s.p("missing.png"),
            "--palette",
            &pal,
            "-o",
            &new_out,
        ],
        &["missing.png", "cannot open"],
    );
    add(
        // A JSON array is read as a colour table (issue 25): an empty one has no colours.
        "apply palette that is an empty JSON array",
        &[
            "apply",
            &good,
            "--palette",
            &s.p("array.palette.json"),
            "-o",
            &new_out,
        ],
        &["array.palette.json", "no colours"],
    );
    add(
        "apply output is a file",
        &["apply", &good, "--palette", &pal, "-o", &s.p("taken")],
        &["taken", "not a folder"],
    );

    // ---- learn: damaged and foreign histogram files, bad settings, bad output ----
    let learned = s.p("learned.palette.json");
    for (name, file, problem) in [
        ("learn damaged histogram", "damaged.hist", "checksum"),
        ("learn histogram of a later version", "v4.hist", "version 4"),
        ("learn truncated histogram", "cut.hist", "truncated"),
        (
            "learn histogram with a foreign header",
            "words.hist",
            "histogram file",
        ),
        ("learn foreign file", "foreign.hist", "not an image"),
        ("learn missing file", "missing.hist", "cannot open"),
    ] {
        add(
            name,
            &["learn", &s.p(file), "-o", &learned],
            &[file, problem],
        );
    }
    add(
        "learn endless device",
        &["learn", "/dev/zero", "-o", &learned],
        &["/dev/zero", "not an image"],
    );
    add(
        "learn k 0",
        &["learn", &s.p("good.hist"), "-k", "0", "-o", &learned],
        &["k must be at least 1"],
    );
    add(
        "learn output is a folder",
        &["learn", &s.p("good.hist"), "-o", &out],
        &["out", "folder"],
    );
    add(
        "learn output under a file",
        &["learn", &s.p("good.hist"), "-o", &s.p("taken/p.json")],
        &["taken", "not a folder"],
    );

    // ---- histogram ----
    add(
        "histogram not an image",
        &["histogram", &s.p("words.png"), "-o", &s.p("h.hist")],
        &["words.png", "not an image"],
    );
    add(
        "histogram bomb",
        &["histogram", &s.p("bomb.png"), "-o", &s.p("h.hist")],
        &["bomb.png", "over the limit"],
    );
    add(
        "histogram output is a folder",
        &["histogram", &good, "-o", &out],
        &["out", "folder"],
    );

    // ---- batch ----
    add(
        "batch missing folder",
        &["batch", &s.p("no-shoot"), "-o", &new_out],
        &["no-shoot"],
    );
    add(
        "batch k 0",
        &["batch", &s.p("shoot"), "-k", "0", "-o", &new_out],
        &["k must be at least 1"],
    );
    add(
        "batch soft beta inf",
        &[
            "batch",
            &s.p("shoot"),
            "--mode",
            "soft",
            "--beta",
            "inf",
            "-o",
            &new_out,
        ],
        &["beta must be a positive finite number"],
    );
    add(
        "batch broken palette",
        &[
            "batch",
            &s.p("shoot"),
            "--palette",
            &s.p("cut.palette.json"),
            "-o",
            &new_out,
        ],
        &["cut.palette.json", "not a palette document"],
    );
    add(
        "batch output inside the input",
        &["batch", &s.p("shoot"), "-o", &s.p("shoot/out")],
        &["inside"],
    );
    rows
}

#[test]
fn every_bad_input_is_refused_cleanly() {
    let s = scene();
    let before = everything_under(&s.root);
    let table = rows(&s);
    assert!(table.len() >= 90, "{} rows", table.len());
    let mut problems = Vec::new();
    for (name, args, expect) in &table {
        let a: Vec<&str> = args.iter().map(String::as_str).collect();
        let e: Vec<&str> = expect.iter().map(String::as_str).collect();
        let o = run(&a, &[]);
        if let Err(m) = check_refusal(&o, name, &e) {
            problems.push(m);
        }
        let after = everything_under(&s.root);
        if after != before {
            let changed: Vec<_> = after
                .iter()
                .filter(|(k, v)| before.get(*k) != Some(*v))
                .map(|(k, _)| k.clone())
                .chain(before.keys().filter(|k| !after.contains_key(*k)).cloned())
                .collect();
            panic!("{name}: the folder changed: {changed:?}");
        }
    }
    assert!(
        problems.is_empty(),
        "{} of {} rows:\n{}",
        problems.len(),
        table.len(),
        problems.join("\n")
    );
}

// ---- Headers that claim huge images ----

/// PNG (ISO/IEC 15948): signature, IHDR for `w × h` 8-bit RGB, a tiny IDAT, IEND.
fn huge_png(w: u32, h: u32) -> Vec<u8> {
    let mut v = b"\x89PNG\r\n\x1a\n".to_vec();
    let mut ihdr = w.to_be_bytes().to_vec();
    ihdr.extend_from_slice(&h.to_be_bytes());
    ihdr.extend_from_slice(&[8, 2, 0, 0, 0]);
    v.extend(png_chunk(b"IHDR", &ihdr));
    // zlib stream of one stored block holding 4 zero bytes (RFC 1950/1951).
    v.extend(png_chunk(
        b"IDAT",
        &[
            0x78, 0x01, 0x01, 0x04, 0x00, 0xfb, 0xff, 0, 0, 0, 0, 0x00, 0x04, 0x00, 0x01,
        ],
    ));
    v.extend(png_chunk(b"IEND", &[]));
    v
}

/// Baseline JPEG (ITU-T T.81, annex B): SOI, one quantisation table, SOF0 for `w × h`
/// with three components, a DC and an AC Huffman table, the start of a scan, a few bytes
/// of entropy-coded data and EOI.
fn huge_jpeg(w: u16, h: u16) -> Vec<u8> {
    let mut v = vec![0xff, 0xd8];
    v.extend_from_slice(&[0xff, 0xdb, 0x00, 0x43, 0x00]);
    v.extend_from_slice(&[1u8; 64]);
    v.extend_from_slice(&[0xff, 0xc0, 0x00, 0x11, 0x08]);
    v.extend_from_slice(&h.to_be_bytes());
    v.extend_from_slice(&w.to_be_bytes());
    v.extend_from_slice(&[3, 1, 0x11, 0, 2, 0x11, 0, 3, 0x11, 0]);
    // DHT: table class 0 (DC) and 1 (AC), id 0, each one code of length 1 for symbol 0.
    for class in [0x00u8, 0x10] {
        v.extend_from_slice(&[0xff, 0xc4, 0x00, 0x14, class, 1]);
        v.extend_from_slice(&[0u8; 15]);
        v.push(0);
    }
    // SOS: three components on tables 0/0, spectral selection 0..63.
    v.extend_from_slice(&[
        0xff, 0xda, 0x00, 0x0c, 3, 1, 0x00, 2, 0x00, 3, 0x00, 0, 63, 0,
    ]);
    v.extend_from_slice(&[0u8; 16]);
    v.extend_from_slice(&[0xff, 0xd9]);
    v
}

/// Little-endian TIFF 6.0 (Adobe 1992, §2 and §8): one IFD for a `w × h` 8-bit grey image
/// in one uncompressed strip whose byte count is the full size.
fn huge_tiff(w: u32, h: u32) -> Vec<u8> {
    let mut v = b"II\x2a\x00\x08\x00\x00\x00".to_vec();
    let entries: [(u16, u16, u32); 9] = [
        (256, 4, w),                   // ImageWidth, LONG
        (257, 4, h),                   // ImageLength
        (258, 3, 8),                   // BitsPerSample, SHORT
        (259, 3, 1),                   // Compression: none
        (262, 3, 1),                   // PhotometricInterpretation: BlackIsZero
        (273, 4, 8 + 2 + 9 * 12 + 4),  // StripOffsets: just after the IFD
        (277, 3, 1),                   // SamplesPerPixel
        (278, 4, h),                   // RowsPerStrip
        (279, 4, w.saturating_mul(h)), // StripByteCounts
    ];
    v.extend_from_slice(&(entries.len() as u16).to_le_bytes());
    for (tag, kind, value) in entries {
        v.extend_from_slice(&tag.to_le_bytes());
        v.extend_from_slice(&kind.to_le_bytes());
        v.extend_from_slice(&1u32.to_le_bytes());
        if kind == 3 {
            v.extend_from_slice(&(value as u16).to_le_bytes());
            v.extend_from_slice(&[0, 0]);
        } else {
            v.extend_from_slice(&value.to_le_bytes());
        }
    }
    v.extend_from_slice(&0u32.to_le_bytes());
    v.extend_from_slice(&[0u8; 64]);
    v
}

/// WebP extended format (the WebP container specification, "Extended File Format"): RIFF
/// header and a VP8X chunk whose canvas is `w × h` (each stored minus one in 24 bits),
/// then a small lossless (VP8L) chunk.
fn huge_webp(w: u32, h: u32) -> Vec<u8> {
    let mut vp8x = vec![0u8, 0, 0, 0];
    vp8x.extend_from_slice(&(w - 1).to_le_bytes()[..3]);
    vp8x.extend_from_slice(&(h - 1).to_le_bytes()[..3]);
    // VP8L: signature 0x2f, then 14-bit width−1 and height−1 (here 1 × 1), alpha, version.
    let vp8l = [0x2f, 0, 0, 0, 0, 0, 0, 0];
    let mut body = b"WEBP".to_vec();
    for (kind, data) in [(b"VP8X", &vp8x[..]), (b"VP8L", &vp8l[..])] {
        body.extend_from_slice(kind);
        body.extend_from_slice(&(data.len() as u32).to_le_bytes());
        body.extend_from_slice(data);
    }
    let mut v = b"RIFF".to_vec();
    v.extend_from_slice(&(body.len() as u32).to_le_bytes());
    v.extend(body);
    v
}

/// BMP: BITMAPFILEHEADER and BITMAPINFOHEADER (Microsoft Windows 3.x format) for a
/// `w × h` 24-bit bottom-up bitmap, and a few bytes of pixels.
fn huge_bmp(w: i32, h: i32) -> Vec<u8> {
    let mut v = b"BM".to_vec();
    v.extend_from_slice(&(54u32 + 16).to_le_bytes());
    v.extend_from_slice(&[0, 0, 0, 0]);
    v.extend_from_slice(&54u32.to_le_bytes());
    v.extend_from_slice(&40u32.to_le_bytes());
    v.extend_from_slice(&w.to_le_bytes());
    v.extend_from_slice(&h.to_le_bytes());
    v.extend_from_slice(&1u16.to_le_bytes());
    v.extend_from_slice(&24u16.to_le_bytes());
    v.extend_from_slice(&[0u8; 24]);
    v.extend_from_slice(&[0u8; 16]);
    v
}

/// GIF89a (the GIF89a specification, 1990): logical screen and one image descriptor of
/// `w × h`, a two-colour global table, a minimal LZW stream, and the trailer.
fn huge_gif(w: u16, h: u16) -> Vec<u8> {
    let mut v = b"GIF89a".to_vec();
    v.extend_from_slice(&w.to_le_bytes());
    v.extend_from_slice(&h.to_le_bytes());
    v.extend_from_slice(&[0x80, 0, 0, 0, 0, 0, 255, 255, 255]);
    v.push(0x2c);
    v.extend_from_slice(&[0, 0, 0, 0]);
    v.extend_from_slice(&w.to_le_bytes());
    v.extend_from_slice(&h.to_le_bytes());
    v.push(0);
    v.extend_from_slice(&[2, 2, 0x44, 0x01, 0, 0x3b]);
    v
}

/// Every decoder refuses a header claiming 60 000 × 60 000 pixels (3.6 billion) from the
/// header alone: at once, with a message naming the limit, and inside an address space
/// of 512 MiB, while decoding the claimed image would need 14 GB.
#[test]
fn every_decoder_refuses_a_huge_header_before_allocating() {
    let dir = tempfile::tempdir().unwrap();
    let files: Vec<(&str, Vec<u8>)> = vec![
        ("huge.png", huge_png(60_000, 60_000)),
        ("huge.jpg", huge_jpeg(60_000, 60_000)),
        ("huge.tif", huge_tiff(60_000, 60_000)),
        ("huge.webp", huge_webp(60_000, 60_000)),
        ("huge.bmp", huge_bmp(60_000, 60_000)),
        ("huge.gif", huge_gif(60_000, 60_000)),
    ];
    let out = dir.path().join("out");
    let before = everything_under(dir.path());
    for (name, bytes) in &files {
        let p = dir.path().join(name);
        std::fs::write(&p, bytes).unwrap();
        let before = {
            let mut b = before.clone();
            b.insert(PathBuf::from(name), Some(bytes.clone()));
            b
        };
        let path = p.to_str().unwrap();
        let o_dir = out.to_str().unwrap();
        // A tight limit, named in the message.
        let t = Instant::now();
        let o = run(
            &["reduce", path, "--max-pixels", "1000000", "-o", o_dir],
            &[],
        );
        assert_refusal(&o, name, &[name, "over the limit of 1000000 pixels"]);
        assert!(
            t.elapsed() < Duration::from_secs(5),
            "{name}: {:?}",
            t.elapsed()
        );
        // The default limits, in an address space far too small for the pixels.
        let t = Instant::now();
        let bin = env!("CARGO_BIN_EXE_chromasift");
        let o = std::process::Command::new("sh")
            .arg("-c")
            .arg("ulimit -v 524288 && exec \"$0\" \"$@\"")
            .args([bin, "reduce", path, "-o", o_dir])
            .output()
            .unwrap();
        assert_refusal(&o, name, &[name, "over the limit of 200000000 pixels"]);
        assert!(
            t.elapsed() < Duration::from_secs(5),
            "{name}: {:?}",
            t.elapsed()
        );
        // A pixel cap raised past the claim: the allocation cap refuses it instead.
        let o = run(
            &["reduce", path, "--max-pixels", "4000000000", "-o", o_dir],
            &[],
        );
        assert_refusal(&o, name, &[name, "over the limit of 3221225472 bytes"]);
        assert_eq!(
            everything_under(dir.path()),
            before,
            "{name}: nothing written"
        );
        std::fs::remove_file(&p).unwrap();
    }
    // The raster reader of `landcover` (TIFF directly, other formats through the image
    // decoders) refuses the same way.
    for (name, bytes) in &files[..3] {
        let p = dir.path().join(name);
        std::fs::write(&p, bytes).unwrap();
        let t = Instant::now();
        let o = run(
            &[
                "landcover",
                p.to_str().unwrap(),
                "--max-pixels",
                "1000000",
                "-o",
                out.to_str().unwrap(),
            ],
            &[],
        );
        assert_refusal(&o, name, &[name, "over the limit of 1000000 pixels"]);
        assert!(t.elapsed() < Duration::from_secs(5));
        std::fs::remove_file(&p).unwrap();
    }
    // Each crafted header is a real header: at a size within the limits, the same bytes
    // are read as far as the pixel data (they fail there, as truncated files, not on
    // the header).
    let small: Vec<(&str, Vec<u8>)> = vec![
        ("small.png", huge_png(2, 2)),
        ("small.tif", huge_tiff(2, 2)),
        ("small.bmp", huge_bmp(2, 2)),
        ("small.gif", huge_gif(2, 2)),
    ];
    for (name, bytes) in &small {
        let limits = chromasift::Limits::default();
        match chromasift::raster::decode_bytes(bytes, Path::new(name), &limits) {
            Ok(d) => assert_eq!((d.width, d.height), (2, 2), "{name}"),
            Err(e) => {
                let m = e.to_string();
                assert!(
                    !m.contains("over the limit") && !m.contains("not an image"),
                    "{name}: {m}"
                );
            }
        }
    }
}
