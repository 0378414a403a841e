//! Small static line plots as inline SVG, for the written report (no script, prints as drawn).

use std::fmt::Write as _;

/// One line on a plot.
#[derive(Debug, Clone, PartialEq)]
pub struct Series {
    /// Points (x, y) in data units, x ascending for lines.
    pub points: Vec<[f64; 2]>,
    /// Stroke colour (CSS).
    pub colour: &'static str,
    /// Stroke width, px.
    pub width: f64,
    /// Drawn dashed.
    pub dashed: bool,
    /// A dot at every point.
    pub markers: bool,
}

impl Series {
    /// A plain line.
    pub fn line(points: Vec<[f64; 2]>, colour: &'static str, width: f64) -> Self {
        Self {
            points,
            colour,
            width,
            dashed: false,
            markers: false,
        }
    }
}

/// A plot's frame.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Frame {
    /// Width, px.
    pub width: f64,
    /// Height, px.
    pub height: f64,
    /// Label under the x axis.
    pub x_label: String,
    /// Label beside the y axis.
    pub y_label: String,
    /// x range (default: the data's).
    pub x_range: Option<[f64; 2]>,
    /// y range (default: the data's).
    pub y_range: Option<[f64; 2]>,
    /// Vertical marker lines at these x values, with a short label each.
    pub x_marks: Vec<(f64, String)>,
    /// A horizontal line at y = 0.
    pub zero_line: bool,
    /// Logarithmic x axis (decade ticks).
    pub log_x: bool,
    /// Logarithmic y axis (decade ticks).
    pub log_y: bool,
    /// Shaded horizontal bands `[y0, y1]`, with a label each.
    pub y_bands: Vec<([f64; 2], String)>,
    /// Shaded vertical bands `[x0, x1]`, with a label each.
    pub x_bands: Vec<([f64; 2], String)>,
}

static CLIP_IDS: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);

/// Decade ticks of a log axis over `[lo, hi]` (log10 units), labelled as numbers.
fn decade_ticks(lo: f64, hi: f64) -> Vec<(f64, String)> {
    (lo.ceil() as i64..=hi.floor() as i64)
        .map(|k| {
            let text = if (0..=5).contains(&k) {
                format!("{}", 10f64.powi(k as i32))
            } else {
                format!("1e{k}")
            };
            (k as f64, text)
        })
        .collect()
}

/// Round tick values covering `[lo, hi]`: steps of 1, 2 or 5 × 10^k, about `target` of them.
pub fn ticks(lo: f64, hi: f64, target: usize) -> Vec<f64> {
    if hi.partial_cmp(&lo) != Some(std::cmp::Ordering::Greater)
        || !lo.is_finite()
        || !hi.is_finite()
    {
        return vec![lo];
    }
    let raw = (hi - lo) / target.max(1) as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let first = (lo / step).ceil() as i64;
    let last = (hi / step).floor() as i64;
    (first..=last).map(|k| k as f64 * step).collect()
}

fn tick_text(v: f64, step: f64) -> String {
    let decimals = if step >= 1.0 {
        0
    } else {
        (-step.log10().floor()) as usize
    };
    // A tick at k·step that rounds to zero prints as "0", never "-0.0".
    let v = if v.abs() < 1e-9 * step { 0.0 } else { v };
    format!("{v:.decimals$}")
}

/// Escapes text for HTML and SVG.
pub fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

fn range_of(series: &[Series], axis: usize) -> [f64; 2] {
    let (lo, hi) = series
        .iter()
        .flat_map(|s| s.points.iter().map(move |p| p[axis]))
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
            (lo.min(v), hi.max(v))
        });
    if !lo.is_finite() {
        return [0.0, 1.0];
    }
    if hi - lo < 1e-12 * lo.abs().max(1.0) {
        return [lo - 1.0, hi + 1.0];
    }
    [lo, hi]
}

/// The plot as an `<svg>` element.
pub fn plot(frame: &Frame, series: &[Series]) -> String {
    let (w, h) = (frame.width, frame.height);
    let (left, right, top, bottom) = (58.0, 22.0, 10.0, 38.0);
    let (pw, ph) = (w - left - right, h - top - bottom);
    // Everything is placed in axis units: log10 of the value on a log axis.
    let ux = |v: f64| if frame.log_x { v.log10() } else { v };
    let uy = |v: f64| if frame.log_y { v.log10() } else { v };
    let [x0, x1] = match frame.x_range {
        Some([a, b]) => [ux(a), ux(b)],
        None => {
            let [a, b] = range_of(series, 0);
            [ux(a), ux(b)]
        }
    };
    let [y0, y1] = match frame.y_range {
        Some([a, b]) => [uy(a), uy(b)],
        None => {
            let [a, b] = range_of(series, 1);
            let (a, b) = (uy(a), uy(b));
            let pad = 0.05 * (b - a);
            [a - pad, b + pad]
        }
    };
    let sx = |x: f64| left + (ux(x) - x0) / (x1 - x0) * pw;
    let sy = |y: f64| top + (1.0 - (uy(y) - y0) / (y1 - y0)) * ph;
    let mut s = String::new();
    let _ = write!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}" class="plot">"#
    );
    let _ = write!(
        s,
        r##"<rect x="{left}" y="{top}" width="{pw}" height="{ph}" fill="#fff" stroke="#888"/>"##
    );
    let clip = format!(
        "clip{}",
        CLIP_IDS.fetch_add(1, std::sync::atomic::Ordering::Relaxed)
    );
    let _ = write!(
        s,
        r#"<clipPath id="{clip}"><rect x="{left}" y="{top}" width="{pw}" height="{ph}"/></clipPath>"#
    );
    for (axis, (lo, hi), log) in [(0, (x0, x1), frame.log_x), (1, (y0, y1), frame.log_y)] {
        // Tick positions in axis units with their labels.
        let marks: Vec<(f64, String)> = if log {
            decade_ticks(lo, hi)
        } else {
            let t = ticks(lo, hi, if axis == 0 { 8 } else { 5 });
            let step = if t.len() > 1 { t[1] - t[0] } else { 1.0 };
            t.into_iter().map(|v| (v, tick_text(v, step))).collect()
        };
        for (v, text) in marks {
            if axis == 0 {
                let x = left + (v - x0) / (x1 - x0) * pw;
                let _ = write!(
                    s,
                    r##"<line x1="{x:.1}" y1="{top}" x2="{x:.1}" y2="{:.1}" stroke="#e4e4e4"/><text x="{x:.1}" y="{:.1}" text-anchor="middle">{text}</text>"##,
                    top + ph,
                    top + ph + 14.0,
                );
            } else {
                let y = top + (1.0 - (v - y0) / (y1 - y0)) * ph;
                let _ = write!(
                    s,
                    r##"<line x1="{left}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="#e4e4e4"/><text x="{:.1}" y="{:.1}" text-anchor="end">{text}</text>"##,
                    left + pw,
                    left - 4.0,
                    y + 4.0,
                );
            }
        }
    }
    let _ = write!(s, r#"<g clip-path="url(#{clip})">"#);
    for ([a, b], label) in &frame.y_bands {
        let (ya, yb) = (sy(*b), sy(*a));
        let _ = write!(
            s,
            r##"<rect x="{left}" y="{ya:.1}" width="{pw}" height="{:.1}" fill="#d9480f" fill-opacity="0.22"/><text x="{:.1}" y="{:.1}" fill="#8a2c00">{}</text>"##,
            (yb - ya).max(1.0),
            left + 4.0,
            ya - 2.0,
            escape(label)
        );
    }
    for ([a, b], label) in &frame.x_bands {
        let (xa, xb) = (sx(*a), sx(*b));
        let _ = write!(
            s,
            r##"<rect x="{xa:.1}" y="{top}" width="{:.1}" height="{ph}" fill="#1f5fa8" fill-opacity="0.10"/><text x="{:.1}" y="{:.1}" fill="#1f5fa8">{}</text>"##,
            (xb - xa).max(1.0),
            xa + 3.0,
            top + ph - 4.0,
            escape(label)
        );
    }
    if frame.zero_line && y0 < 0.0 && y1 > 0.0 {
        let _ = write!(
            s,
            r##"<line x1="{left}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="#999"/>"##,
            left + pw,
            y = sy(0.0)
        );
    }
    for (x, label) in &frame.x_marks {
        let px = sx(*x);
        let _ = write!(
            s,
            r##"<line x1="{px:.1}" y1="{top}" x2="{px:.1}" y2="{:.1}" stroke="#b35900" stroke-dasharray="3 3"/><text x="{:.1}" y="{:.1}" fill="#b35900">{}</text>"##,
            top + ph,
            px + 3.0,
            top + 12.0,
            escape(label)
        );
    }
    for se in series {
        let pts: Vec<String> = se
            .points
            .iter()
            .filter(|p| p[0].is_finite() && p[1].is_finite())
            .map(|p| format!("{:.1},{:.1}", sx(p[0]), sy(p[1])))
            .collect();
        if pts.is_empty() {
            continue;
        }
        let dash = if se.dashed {
            r#" stroke-dasharray="6 4""#
        } else {
            ""
        };
        let _ = write!(
            s,
            r#"<polyline fill="none" stroke="{}" stroke-width="{}"{dash} points="{}"/>"#,
            se.colour,
            se.width,
            pts.join(" ")
        );
        if se.markers {
            for p in se
                .points
                .iter()
                .filter(|p| p[0].is_finite() && p[1].is_finite())
            {
                let _ = write!(
                    s,
                    r#"<circle cx="{:.1}" cy="{:.1}" r="3" fill="{}"/>"#,
                    sx(p[0]),
                    sy(p[1]),
                    se.colour
                );
            }
        }
    }
    s.push_str("</g>");
    let _ = write!(
        s,
        r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">{}</text>"#,
        left + pw / 2.0,
        h - 6.0,
        escape(&frame.x_label)
    );
    let _ = write!(
        s,
        r#"<text transform="translate(14 {:.1}) rotate(-90)" text-anchor="middle">{}</text>"#,
        top + ph / 2.0,
        escape(&frame.y_label)
    );
    s.push_str("</svg>");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_are_round_and_cover_the_range() {
        let near = |got: Vec<f64>, want: &[f64]| {
            assert_eq!(got.len(), want.len(), "{got:?}");
            for (g, w) in got.iter().zip(want) {
                assert!((g - w).abs() < 1e-12, "{got:?} vs {want:?}");
            }
        };
        near(ticks(0.0, 1.0, 5), &[0.0, 0.2, 0.4, 0.6, 0.8, 1.0]);
        near(ticks(13.0, 4017.0, 8), &[1000.0, 2000.0, 3000.0, 4000.0]);
        near(ticks(-1.0, 1.0, 5), &[-1.0, -0.5, 0.0, 0.5, 1.0]);
        assert_eq!(tick_text(0.6000000000000001, 0.2), "0.6");
        assert_eq!(tick_text(-1e-17, 0.5), "0.0");
    }
}
