//! Line charts as SVG: panels of curves against K with round ticks, labels kept apart,
//! and the layout of what was drawn (for the checks that nothing overlaps).

/// About `n` round tick values covering [lo, hi].
pub(crate) fn ticks(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    if hi.is_nan() || lo.is_nan() || hi <= lo {
        return vec![lo];
    }
    let raw = (hi - lo) / n as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let mut v = (lo / step).ceil() * step;
    let mut out = Vec::new();
    while v <= hi + step * 1e-9 {
        out.push(if v.abs() < step * 1e-9 { 0.0 } else { v });
        v += step;
    }
    out
}

pub(crate) fn label(v: f64) -> String {
    let a = v.abs();
    if a != 0.0 && !(1e-3..1e5).contains(&a) {
        format!("{v:.1e}")
    } else if a >= 100.0 || v.fract() == 0.0 {
        format!("{v:.0}")
    } else {
        let s = format!("{v:.3}");
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    }
}

pub(crate) fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

/// Width of `text` at `size` px, estimated at 0.6 em per character (wider than the
/// average sans-serif glyph, so the estimate errs on the side of room).
pub(crate) fn text_width(text: &str, size: f64) -> f64 {
    0.6 * size * text.chars().count() as f64
}

/// A text's box on the canvas, for the layout checks.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct TextBox {
    pub text: String,
    pub x0: f64,
    pub y0: f64,
    pub x1: f64,
    pub y1: f64,
}

/// What the chart drew, in canvas coordinates: every label's box and every curve.
#[derive(Debug, Default)]
pub(crate) struct Layout {
    pub texts: Vec<TextBox>,
    pub curves: Vec<Vec<(f64, f64)>>,
}

/// The SVG being written and the layout of what it holds.
pub(crate) struct Canvas {
    pub svg: String,
    pub layout: Layout,
}

impl Canvas {
    /// A text at baseline `y`, anchored at `x` ("start", "middle" or "end").
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn text(
        &mut self,
        x: f64,
        y: f64,
        size: f64,
        anchor: &str,
        style: &str,
        text: &str,
    ) {
        let w = text_width(text, size);
        let x0 = match anchor {
            "end" => x - w,
            "middle" => x - w / 2.0,
            _ => x,
        };
        self.layout.texts.push(TextBox {
            text: text.to_string(),
            x0,
            y0: y - 0.8 * size,
            x1: x0 + w,
            y1: y + 0.2 * size,
        });
        self.svg.push_str(&format!(
            "<text x=\"{x:.1}\" y=\"{y:.1}\" font-size=\"{size}\" text-anchor=\"{anchor}\"{}>{}</text>\n",
            if style.is_empty() {
                String::new()
            } else {
                format!(" style=\"{style}\"")
            },
            escape(text)
        ));
    }
}

/// One line of a panel.
pub(crate) struct Series<'a> {
    pub name: String,
    pub colour: &'a str,
    pub values: Vec<(usize, f64)>,
    pub dashed: bool,
    /// The K this criterion suggests on its own: ringed on the curve.
    pub best: Option<usize>,
}

pub(crate) const PANEL_W: f64 = 400.0;
pub(crate) const PANEL_H: f64 = 250.0;

/// One plot panel with its top-left corner at (x0, y0): title, a legend row (with the
/// recommended K) above the frame, the curves inside it, guide labels in the right margin.
#[allow(clippy::too_many_arguments)]
pub(crate) fn panel(
    c: &mut Canvas,
    x0: f64,
    y0: f64,
    title: &str,
    y_unit: &str,
    ks: (usize, usize),
    series: &[Series],
    recommended: Option<usize>,
    guides: &[(f64, &str)],
) {
    let (l, r, t, b) = (62.0, 34.0, 62.0, 40.0);
    let (pw, ph) = (PANEL_W - l - r, PANEL_H - t - b);
    let (fl, ft) = (x0 + l, y0 + t);
    c.text(
        x0 + 10.0,
        y0 + 18.0,
        13.0,
        "start",
        "font-weight:bold",
        title,
    );
    let vals: Vec<f64> = series
        .iter()
        .flat_map(|s| s.values.iter().map(|v| v.1))
        .chain(guides.iter().map(|g| g.0))
        .filter(|v| v.is_finite())
        .collect();
    if vals.is_empty() || series.iter().all(|s| s.values.is_empty()) {
        c.text(
            fl + 10.0,
            ft + ph / 2.0,
            12.0,
            "start",
            "fill:#666",
            "not defined for this input",
        );
        return;
    }
    // Legend: entries left to right over two rows, the recommended K right-aligned last.
    let mut lx = fl;
    let mut row = 0;
    let rows_y = [y0 + 36.0, y0 + 51.0];
    let right = fl + pw;
    let mut items: Vec<(Option<&Series>, String)> = series
        .iter()
        .map(|s| {
            let name = match s.best {
                Some(k) => format!("{} (suggests {k})", s.name),
                None => s.name.clone(),
            };
            (Some(s), name)
        })
        .collect();
    if let Some(k) = recommended {
        items.push((None, format!("recommended K = {k}")));
    }
    for (s, name) in &items {
        let w = text_width(name, 10.0) + if s.is_some() { 22.0 } else { 0.0 };
        if lx + w > right && lx > fl {
            row = (row + 1).min(1);
            lx = fl;
        }
        let y = rows_y[row];
        match s {
            Some(s) => {
                c.svg.push_str(&format!(
                    "<line x1=\"{lx:.1}\" x2=\"{:.1}\" y1=\"{:.1}\" y2=\"{:.1}\" stroke=\"{}\" stroke-width=\"2\"{}/>\n",
                    lx + 18.0,
                    y - 3.5,
                    y - 3.5,
                    s.colour,
                    if s.dashed { " stroke-dasharray=\"5,3\"" } else { "" }
                ));
                c.text(lx + 22.0, y, 10.0, "start", "", name);
            }
            None => {
                // The recommendation goes to the right end of the row.
                let x = if right - w >= lx { right } else { lx + w };
                c.text(x, y, 10.0, "end", "fill:#c0392b;font-weight:bold", name);
            }
        }
        lx += w + 12.0;
    }
    let (mut lo, mut hi) = vals
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    if hi - lo < 1e-12 * hi.abs().max(1.0) {
        lo -= 0.5 * lo.abs().max(1.0);
        hi += 0.5 * hi.abs().max(1.0);
    }
    let pad = 0.06 * (hi - lo);
    let (lo, hi) = (lo - pad, hi + pad);
    let xs = |k: usize| {
        if ks.1 == ks.0 {
            fl + pw / 2.0
        } else {
            fl + pw * (k - ks.0) as f64 / (ks.1 - ks.0) as f64
        }
    };
    let ys = |v: f64| ft + ph * (1.0 - (v - lo) / (hi - lo));
    c.svg.push_str(&format!(
        "<rect x=\"{fl}\" y=\"{ft}\" width=\"{pw}\" height=\"{ph}\" fill=\"none\" stroke=\"#333\"/>\n"
    ));
    for v in ticks(lo, hi, 4) {
        let y = ys(v);
        c.svg.push_str(&format!(
            "<line x1=\"{fl}\" x2=\"{:.1}\" y1=\"{y:.1}\" y2=\"{y:.1}\" stroke=\"#ddd\"/>\n",
            fl + pw
        ));
        c.text(fl - 5.0, y + 3.5, 10.0, "end", "", &label(v));
    }
    let step = ((ks.1 - ks.0) / 12).max(1);
    for k in (ks.0..=ks.1).step_by(step) {
        c.text(xs(k), ft + ph + 14.0, 10.0, "middle", "", &k.to_string());
    }
    c.text(
        fl + pw / 2.0,
        ft + ph + 31.0,
        11.0,
        "middle",
        "",
        "K (colours or classes)",
    );
    // The y-axis name, rotated: its box is tall and narrow.
    let w = text_width(y_unit, 11.0);
    c.layout.texts.push(TextBox {
        text: y_unit.to_string(),
        x0: x0 + 5.0,
        y0: ft + ph / 2.0 - w / 2.0,
        x1: x0 + 16.0,
        y1: ft + ph / 2.0 + w / 2.0,
    });
    c.svg.push_str(&format!(
        "<text transform=\"translate({:.1},{:.1}) rotate(-90)\" font-size=\"11\" text-anchor=\"middle\">{}</text>\n",
        x0 + 14.0,
        ft + ph / 2.0,
        escape(y_unit)
    ));
    // Guides: dotted lines across the frame, labels in the right margin, pushed apart.
    let mut gl: Vec<(f64, &str)> = Vec::new();
    for (v, name) in guides {
        if *v >= lo && *v <= hi {
            let y = ys(*v);
            c.svg.push_str(&format!(
                "<line x1=\"{fl}\" x2=\"{:.1}\" y1=\"{y:.1}\" y2=\"{y:.1}\" stroke=\"#888\" stroke-dasharray=\"2,3\"/>\n",
                fl + pw
            ));
            gl.push((y + 3.0, name));
        }
    }
    gl.sort_by(|a, b| a.0.total_cmp(&b.0));
    for i in 1..gl.len() {
        if gl[i].0 < gl[i - 1].0 + 11.0 {
            gl[i].0 = gl[i - 1].0 + 11.0;
        }
    }
    for (y, name) in gl {
        c.text(fl + pw + 4.0, y, 9.0, "start", "fill:#666", name);
    }
    if let Some(k) = recommended {
        let x = xs(k);
        c.svg.push_str(&format!(
            "<line x1=\"{x:.1}\" x2=\"{x:.1}\" y1=\"{ft}\" y2=\"{:.1}\" stroke=\"#c0392b\" stroke-width=\"1.5\" stroke-dasharray=\"4,3\"/>\n",
            ft + ph
        ));
    }
    for s in series {
        let pts: Vec<(f64, f64)> = s
            .values
            .iter()
            .filter(|v| v.1.is_finite())
            .map(|&(k, v)| (xs(k), ys(v)))
            .collect();
        let text: Vec<String> = pts.iter().map(|(x, y)| format!("{x:.1},{y:.1}")).collect();
        c.svg.push_str(&format!(
            "<polyline points=\"{}\" fill=\"none\" stroke=\"{}\" stroke-width=\"2\"{}/>\n",
            text.join(" "),
            s.colour,
            if s.dashed {
                " stroke-dasharray=\"5,3\""
            } else {
                ""
            }
        ));
        for (x, y) in &pts {
            c.svg.push_str(&format!(
                "<circle cx=\"{x:.1}\" cy=\"{y:.1}\" r=\"2.5\" fill=\"{}\"/>\n",
                s.colour
            ));
        }
        if let Some(k) = s.best {
            if let Some(&(_, v)) = s.values.iter().find(|v| v.0 == k) {
                c.svg.push_str(&format!(
                    "<circle cx=\"{:.1}\" cy=\"{:.1}\" r=\"6\" fill=\"none\" stroke=\"{}\" stroke-width=\"1.5\"/>\n",
                    xs(k),
                    ys(v),
                    s.colour
                ));
            }
        }
        c.layout.curves.push(pts);
    }
}

/// Splits `text` into lines of at most `width` characters at spaces.
pub(crate) fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        if !line.is_empty() && line.chars().count() + 1 + word.chars().count() > width {
            lines.push(std::mem::take(&mut line));
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}
