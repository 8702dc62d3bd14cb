//! `sweep.svg`: the sweep's measures drawn against K.

use super::measures::{FAMILY_DELTA_E2000, STABILITY_RUNS};
use super::{SweepDocument, SweepRow};
use crate::colour::Space;
use crate::render::chart::{label, panel, wrap, Canvas, Layout, Series, PANEL_H};

/// `sweep.svg`: one panel per measure against K, each criterion's own choice ringed on its
/// curve, the recommended K marked in every panel and explained below them.
pub fn sweep_svg(doc: &SweepDocument, space: Space) -> String {
    render_svg(doc, space).svg
}

pub(crate) fn render_svg(doc: &SweepDocument, space: Space) -> Canvas {
    let ks = (
        doc.rows.first().map_or(1, |r| r.k),
        doc.rows.last().map_or(1, |r| r.k),
    );
    let col = |f: &dyn Fn(&SweepRow) -> Option<f64>| -> Vec<(usize, f64)> {
        doc.rows
            .iter()
            .filter_map(|r| f(r).map(|v| (r.k, v)))
            .collect()
    };
    let colour_image = doc.rows.iter().any(|r| r.mean_delta_e2000.is_some());
    let sse_unit = if colour_image {
        match space {
            Space::Cielab => "SSE (ΔE*ab²)",
            Space::Oklab => "SSE (OKLab units²)",
        }
    } else {
        "SSE (scaled units²)"
    };
    let best = |name: &str| doc.suggested.get(name).copied();
    let rec = doc.recommended.as_ref().map(|r| r.k);
    let series = |name: &str, colour: &'static str, values, dashed, best| Series {
        name: name.to_string(),
        colour,
        values,
        dashed,
        best,
    };
    let (width, height) = (820.0, 1290.0);
    let mut c = Canvas {
        svg: format!(
            "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{width}\" height=\"{height}\" viewBox=\"0 0 {width} {height}\" font-family=\"sans-serif\">\n<rect width=\"{width}\" height=\"{height}\" fill=\"white\"/>\n"
        ),
        layout: Layout::default(),
    };
    let heading = format!(
        "chromasift sweep: {}  (K {}..{}, {})",
        doc.header.input.as_deref().unwrap_or("input"),
        ks.0,
        ks.1,
        doc.features
    );
    c.text(10.0, 22.0, 15.0, "start", "font-weight:bold", &heading);
    let top = 34.0;
    let at = |i: usize| {
        (
            if i % 2 == 0 { 0.0 } else { 410.0 },
            top + PANEL_H * (i / 2) as f64,
        )
    };
    let p = at(0);
    panel(
        &mut c,
        p.0,
        p.1,
        "Colour difference, source vs reduced",
        "ΔE2000",
        ks,
        &[
            series("mean", "#1f77b4", col(&|r| r.mean_delta_e2000), false, None),
            series(
                "95th percentile",
                "#ff7f0e",
                col(&|r| r.p95_delta_e2000),
                true,
                None,
            ),
        ],
        rec,
        &[(1.0, "1*"), (3.0, "3*")],
    );
    let p = at(1);
    panel(
        &mut c,
        p.0,
        p.1,
        "k-means objective, summed over pixels",
        sse_unit,
        ks,
        &[series("SSE", "#2ca02c", col(&|r| Some(r.sse)), false, None)],
        rec,
        &[],
    );
    let p = at(2);
    panel(
        &mut c,
        p.0,
        p.1,
        "Mean silhouette (higher is better)",
        "silhouette (−1..1)",
        ks,
        &[series(
            "silhouette",
            "#9467bd",
            col(&|r| r.silhouette),
            false,
            best("silhouette"),
        )],
        rec,
        &[],
    );
    let p = at(3);
    panel(
        &mut c,
        p.0,
        p.1,
        "Stability across subsamples (higher: stabler)",
        "adjusted Rand index",
        ks,
        &[series(
            "stability",
            "#e377c2",
            col(&|r| r.stability),
            false,
            best("stability"),
        )],
        rec,
        &[],
    );
    let p = at(4);
    panel(
        &mut c,
        p.0,
        p.1,
        "BIC, one shared spherical variance",
        "BIC",
        ks,
        &[series(
            "BIC spherical",
            "#8c564b",
            col(&|r| r.bic),
            false,
            best("bic"),
        )],
        rec,
        &[],
    );
    let p = at(5);
    panel(
        &mut c,
        p.0,
        p.1,
        "BIC and ICL, full covariances (lower is better)",
        "criterion",
        ks,
        &[
            series(
                "BIC full",
                "#d62728",
                col(&|r| r.bic_full),
                false,
                best("bic_full"),
            ),
            series("ICL", "#7f7f7f", col(&|r| r.icl), true, best("icl")),
        ],
        rec,
        &[],
    );
    let p = at(6);
    panel(
        &mut c,
        p.0,
        p.1,
        "Mean uncertainty of the soft assignment",
        "entropy / ln K (0 = certain)",
        ks,
        &[series(
            "uncertainty",
            "#17becf",
            col(&|r| Some(r.mean_uncertainty)),
            false,
            None,
        )],
        rec,
        &[],
    );
    let p = at(7);
    let family = format!("{FAMILY_DELTA_E2000}");
    panel(
        &mut c,
        p.0,
        p.1,
        "Closest pair of fitted colours",
        "ΔE2000",
        ks,
        &[series(
            "closest pair",
            "#bcbd22",
            col(&|r| r.closest_delta_e2000),
            false,
            None,
        )],
        rec,
        &[(FAMILY_DELTA_E2000, family.as_str())],
    );
    // Notes under the panels.
    let mut y = top + 4.0 * PANEL_H + 20.0;
    let mut note = |c: &mut Canvas, text: &str, style: &str| {
        for line in wrap(text, 118) {
            c.text(10.0, y, 11.0, "start", style, &line);
            y += 15.0;
        }
    };
    if let Some(r) = &doc.recommended {
        note(
            &mut c,
            &format!("Recommended K = {} (rule: {}). {}", r.k, r.rule, r.reason),
            "font-weight:bold;fill:#c0392b",
        );
        note(&mut c, &format!("Agreement: {}.", r.agreement), "");
    }
    note(
        &mut c,
        &format!(
            "Silhouette: Rousseeuw (1987), on a seeded sample of {} pixels or rows. Stability: mean adjusted Rand index between {STABILITY_RUNS} k-means fits on seeded subsamples (after Lange, Roth, Braun & Buhmann 2004). Rings mark the K each criterion suggested on its own.",
            doc.silhouette_sample
        ),
        "",
    );
    note(
        &mut c,
        &format!(
            "BIC: Schwarz (1978). Spherical: one shared variance, which on images keeps favouring more colours. Full: Gaussian mixture with a covariance per cluster, fitted by EM from the k-means fit (covariance floor {}); ICL: Biernacki, Celeux & Govaert (2000).",
            label(doc.covariance_floor)
        ),
        "",
    );
    if colour_image {
        note(
            &mut c,
            &format!("* Dotted grey lines on the ΔE panel: ΔE2000 1 and 3 are rules of thumb (noticeable; print tolerance), common practice, not a standard. On the closest-pair panel: ΔE2000 {FAMILY_DELTA_E2000}, closer colours are one family."),
            "",
        );
    }
    c.svg.push_str("</svg>\n");
    c
}
