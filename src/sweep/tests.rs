//! Unit tests of the sweep: measures, suggestions, the recommendation and the chart.

use super::chart::render_svg;
use super::*;
use crate::render::chart::{ticks, TextBox};

#[test]
fn k_ranges_parse_and_refuse() {
    assert_eq!(
        "2..16".parse::<KRange>().unwrap(),
        KRange { min: 2, max: 16 }
    );
    assert_eq!(
        "3..=5".parse::<KRange>().unwrap(),
        KRange { min: 3, max: 5 }
    );
    assert_eq!("4..4".parse::<KRange>().unwrap(), KRange { min: 4, max: 4 });
    for bad in ["", "2", "0..4", "5..3", "a..b", "2..1000", "2...5"] {
        assert!(bad.parse::<KRange>().is_err(), "{bad}");
    }
}

#[test]
fn ticks_are_round_and_cover_the_range() {
    let t = ticks(0.13, 0.87, 4);
    let want = [0.2, 0.4, 0.6, 0.8];
    assert_eq!(t.len(), want.len());
    for (a, b) in t.iter().zip(want) {
        assert!((a - b).abs() < 1e-12, "{t:?}");
    }
    assert!(ticks(5.0, 5.0, 4).len() == 1);
}

#[test]
fn suggestions_take_the_best_and_the_smaller_k_on_ties() {
    let row = |k, s, b| SweepRow {
        k,
        sse: 1.0,
        mean_delta_e2000: None,
        p95_delta_e2000: None,
        mean_uncertainty: 0.0,
        silhouette: s,
        bic: b,
        bic_full: None,
        icl: None,
        stability: None,
        closest_delta_e2000: None,
        smallest_share: 0.1,
        families: None,
    };
    let rows = vec![
        row(1, None, Some(10.0)),
        row(2, Some(0.5), Some(4.0)),
        row(3, Some(0.7), Some(4.0)),
        row(4, Some(0.7), Some(6.0)),
    ];
    let s = suggest(&rows);
    assert_eq!(s["silhouette"], 3);
    assert_eq!(s["bic"], 2);
}

fn row(k: usize) -> SweepRow {
    SweepRow {
        k,
        sse: 1000.0 / k as f64,
        mean_delta_e2000: Some(20.0 / k as f64),
        p95_delta_e2000: Some(35.0 / k as f64),
        mean_uncertainty: 0.1,
        silhouette: Some(0.5),
        bic: Some(100.0 - k as f64),
        bic_full: Some(90.0 - k as f64),
        icl: Some(95.0 - k as f64),
        stability: (k > 1).then_some(1.0),
        closest_delta_e2000: (k > 1).then_some(if k <= 5 { 20.0 } else { 2.0 }),
        smallest_share: 0.05,
        families: Some(k.min(5)),
    }
}

#[test]
fn recommendation_counts_colour_families_and_stable_classes() {
    // Every criterion keeps improving up to K = 8, but from K = 6 the extra colours
    // chain into existing families: five families.
    let rows: Vec<SweepRow> = (1..=8).map(row).collect();
    let s = suggest(&rows);
    assert_eq!(s["bic_full"], 8);
    let r = recommend(&rows, &s).unwrap();
    assert_eq!((r.k, r.rule.as_str()), (5, "distinct colours"));
    assert!(r.reason.starts_with("5 colour families"), "{}", r.reason);
    // A K where one more family shows (k-means separated two close ones there).
    let mut more = rows.clone();
    more[6].families = Some(6);
    let r = recommend(&more, &s).unwrap();
    assert_eq!(r.k, 6);
    // Its own row shows five: the reason says so, where the table would contradict it.
    assert!(
        r.reason
            .contains("At K = 6 itself this sweep's plain k-means fit shows 5"),
        "{}",
        r.reason
    );
    assert!(!recommend(&rows, &s)
        .unwrap()
        .reason
        .contains("itself this sweep"));
    // Never above the mixture criteria's choice.
    let mut s2 = s.clone();
    s2.insert("bic_full".into(), 3);
    s2.insert("icl".into(), 2);
    assert_eq!(recommend(&rows, &s2).unwrap().k, 3);
    // Scenes: the largest stable K with no tiny class.
    let mut scene: Vec<SweepRow> = rows
        .iter()
        .map(|r| SweepRow {
            mean_delta_e2000: None,
            families: None,
            stability: (r.k > 1).then_some(if r.k <= 4 { 0.98 } else { 0.6 }),
            ..r.clone()
        })
        .collect();
    let r = recommend(&scene, &s).unwrap();
    assert_eq!((r.k, r.rule.as_str()), (4, "stable classes"));
    assert!(r.reason.contains("Not K = 5"), "{}", r.reason);
    scene[3].smallest_share = 0.001;
    assert_eq!(recommend(&scene, &s).unwrap().k, 3);
}

/// The chart's labels (boxes estimated at 0.6 em per character, taller than the
/// glyphs) never overlap each other, never cross a plotted curve, and stay on the
/// canvas, for a colour sweep and a scene sweep over short and long ranges.
#[test]
fn chart_labels_do_not_overlap_each_other_or_the_curves() {
    let seg_hits_box = |a: (f64, f64), b: (f64, f64), t: &TextBox| -> bool {
        // Sample the segment finely (0.5 px): enough for boxes at least 7 px tall.
        let n = (((b.0 - a.0).hypot(b.1 - a.1)) / 0.5).ceil().max(1.0) as usize;
        (0..=n).any(|i| {
            let f = i as f64 / n as f64;
            let (x, y) = (a.0 + f * (b.0 - a.0), a.1 + f * (b.1 - a.1));
            x >= t.x0 - 1.0 && x <= t.x1 + 1.0 && y >= t.y0 - 1.0 && y <= t.y1 + 1.0
        })
    };
    for (ks, colour) in [
        ((1, 16), true),
        ((2, 6), true),
        ((2, 40), false),
        ((3, 3), true),
    ] {
        let rows: Vec<SweepRow> = (ks.0..=ks.1)
            .map(|k| {
                let mut r = row(k);
                if !colour {
                    r.mean_delta_e2000 = None;
                    r.p95_delta_e2000 = None;
                    r.closest_delta_e2000 = None;
                    r.families = None;
                }
                // Curves that wander over the whole frame, including its top corners.
                r.bic_full = Some(((k * 7919) % 13) as f64);
                r.silhouette = Some(if k % 2 == 0 { 0.9 } else { -0.2 });
                r
            })
            .collect();
        let suggested = suggest(&rows);
        let doc = SweepDocument {
            header: DocumentHeader {
                tool_version: "test".into(),
                input: Some("a-rather-long-file-name-for-the-heading.png".into()),
                seed: 1,
                engine: EngineOptions::default(),
            },
            features: "cielab".into(),
            silhouette_sample: 2000,
            covariance_floor: 0.25,
            recommended: recommend(&rows, &suggested),
            suggested,
            rows,
            input_profile: None,
        };
        let c = render_svg(&doc, Space::Cielab);
        let t = &c.layout.texts;
        assert!(t.len() > 40);
        for (i, a) in t.iter().enumerate() {
            assert!(
                a.x0 >= 0.0 && a.x1 <= 820.0 && a.y0 >= 0.0 && a.y1 <= 1290.0,
                "off the canvas: {a:?}"
            );
            for b in &t[i + 1..] {
                let apart = a.x1 <= b.x0 || b.x1 <= a.x0 || a.y1 <= b.y0 || b.y1 <= a.y0;
                assert!(apart, "{ks:?}: {a:?} overlaps {b:?}");
            }
            for curve in &c.layout.curves {
                for w in curve.windows(2) {
                    assert!(!seg_hits_box(w[0], w[1], a), "{ks:?}: curve crosses {a:?}");
                }
                for &p in curve {
                    assert!(!seg_hits_box(p, p, a), "{ks:?}: point inside {a:?}");
                }
            }
        }
    }
}
