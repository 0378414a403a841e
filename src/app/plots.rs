//! Plot helpers shared by the views: colours, pixel-density reduction, frequency axes.

use eframe::egui::{self, Color32};
use egui_plot::{GridMark, PlotBounds, PlotPoint, PlotPoints};

use crate::reduce;

static DARK: std::sync::atomic::AtomicBool = std::sync::atomic::AtomicBool::new(true);

/// Chooses the palette for the theme (called when the theme is set).
pub fn set_dark(dark: bool) {
    DARK.store(dark, std::sync::atomic::Ordering::Relaxed);
}

/// The theme now in use is dark.
pub fn is_dark() -> bool {
    DARK.load(std::sync::atomic::Ordering::Relaxed)
}

// tapgrid's palette: teal for good, vermilion for a problem, ochre for a caution, slate for not
// measured, cobalt for the selection. Each has a light-theme twin dark enough to read as text on
// white (contrast ≥ 4.5:1, WCAG 2.1 §1.4.3) and a dark-theme twin light enough on near-black.
fn pick(dark: Color32, light: Color32) -> Color32 {
    if is_dark() { dark } else { light }
}

/// Good (accepted) — a blue-green that stays apart from the warning colours for most colour vision.
pub fn good() -> Color32 {
    pick(
        Color32::from_rgb(38, 166, 154),
        Color32::from_rgb(0, 110, 98),
    )
}
/// A problem (rejected hit, failed fit).
pub fn bad() -> Color32 {
    pick(
        Color32::from_rgb(236, 104, 66),
        Color32::from_rgb(180, 50, 14),
    )
}
/// Needs a look (accepted with warnings, overridden, cautions).
pub fn warn() -> Color32 {
    pick(
        Color32::from_rgb(232, 178, 48),
        Color32::from_rgb(138, 90, 0),
    )
}
/// Not measured.
pub fn idle() -> Color32 {
    pick(
        Color32::from_rgb(128, 128, 128),
        Color32::from_rgb(105, 105, 110),
    )
}
/// Highlight (current station, selected mode).
pub fn accent() -> Color32 {
    pick(
        Color32::from_rgb(96, 150, 240),
        Color32::from_rgb(28, 84, 188),
    )
}

/// A colour per overlaid trace, spread around the hue circle by the golden angle; deeper on a
/// light background so thin lines stay visible.
pub fn trace_color(i: usize) -> Color32 {
    let h = (0.58 + i as f32 * 0.381_966) % 1.0;
    let (sat, val) = if is_dark() { (0.6, 0.85) } else { (0.85, 0.62) };
    egui::ecolor::Hsva::new(h, sat, val, 1.0).into()
}

/// A plot with tapgrid's axes: ticks on 1-2-5 steps with a labelled tick at least every 64 px
/// across and 24 px up, so every axis carries readable labels however short the plot (the
/// toolkit's decade steps left lone "0" labels), printed with the decimals their step needs.
pub fn plot<'a>(id: impl egui::AsIdSalt) -> egui_plot::Plot<'a> {
    // Labels at full strength from the spacing the ladder guarantees (the toolkit fades them
    // in over 60–80 px across, 20–30 px up).
    egui_plot::Plot::new(id)
        .custom_x_axes(vec![
            egui_plot::AxisHints::new_x().label_spacing(egui::Rangef::new(40.0, 41.0)),
        ])
        .custom_y_axes(vec![
            egui_plot::AxisHints::new_y().label_spacing(egui::Rangef::new(16.0, 17.0)),
        ])
        .grid_spacing(egui::Rangef::new(GRID_MIN_PX as f32, 300.0))
        .x_grid_spacer(|g| nice_grid(g, X_LABEL_PX))
        .y_grid_spacer(|g| nice_grid(g, Y_LABEL_PX))
        .x_axis_formatter(tick_label)
        .y_axis_formatter(tick_label)
}

/// Least spacing of labelled ticks across (room for "10000" and a gap) and up, px.
const X_LABEL_PX: f64 = 64.0;
const Y_LABEL_PX: f64 = 24.0;

/// Smallest spacing of grid lines, px (the toolkit sizes `base_step_size` from it).
const GRID_MIN_PX: f64 = 8.0;

/// A tick's value with as many decimals as its step needs.
pub fn tick_label(m: GridMark, _range: &std::ops::RangeInclusive<f64>) -> String {
    let decimals = (-m.step_size.log10().floor()).clamp(0.0, 6.0) as usize;
    let v = if m.value.abs() < m.step_size * 1e-6 {
        0.0
    } else {
        m.value
    };
    format!("{v:.decimals$}")
}

/// The smallest 1-2-5 value (× a power of ten) at or above `x`.
fn nice_at_least(x: f64) -> f64 {
    let unit = 10f64.powf(x.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .map(|m| m * unit)
        .find(|v| *v >= x * (1.0 - 1e-9))
        .unwrap_or(10.0 * unit)
}

/// Grid marks: fine lines at the smallest 1-2-5 step the toolkit allows, and a labelled level
/// at the smallest 1-2-5 multiple of it at least `label_px` apart.
pub fn nice_grid(input: egui_plot::GridInput, label_px: f64) -> Vec<GridMark> {
    let (lo, hi) = input.bounds;
    let base = input.base_step_size.abs();
    if !(lo.is_finite() && hi.is_finite() && base.is_finite() && base > 0.0 && hi > lo) {
        return Vec::new();
    }
    let fine = nice_at_least(base);
    let px_per_unit = GRID_MIN_PX / base;
    let mut label = fine;
    while label * px_per_unit < label_px {
        let next = nice_at_least(label * 1.000_001);
        // Keep the labelled level a whole number of fine steps (2 → 5 is not).
        let q = next / fine;
        label = if (q - q.round()).abs() < 1e-6 {
            next
        } else {
            nice_at_least(next * 1.000_001)
        };
    }
    let first = (lo / fine).ceil() as i64;
    let last = (hi / fine).floor() as i64;
    if last < first || last - first > 10_000 {
        return Vec::new();
    }
    (first..=last)
        .map(|i| {
            let value = i as f64 * fine;
            let q = value / label;
            let step_size = if (q - q.round()).abs() < 1e-6 {
                label
            } else {
                fine
            };
            GridMark { value, step_size }
        })
        .collect()
}

/// How overlaid traces reach the screen (the window uses [`PlotMode::Cached`]; the others are
/// the benchmark's comparisons).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum PlotMode {
    /// Overlays drawn into a cached image; the highlighted trace as a plot line.
    #[default]
    Cached,
    /// Every trace a plot line, reduced to min/max pairs per pixel column.
    Reduced,
    /// Every trace a plot line with every sample.
    Full,
}

/// Reusable buffers, so frames do not allocate per trace.
#[derive(Default)]
pub struct Scratch {
    /// How overlays are drawn.
    pub mode: PlotMode,
    buf: Vec<[f64; 2]>,
    xs: Vec<f64>,
    ys: Vec<f64>,
}

/// A frequency axis: linear, or log10 of the frequency with decade labels.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FreqAxis {
    /// Logarithmic.
    pub log: bool,
}

impl FreqAxis {
    /// Plotted abscissa of a frequency.
    pub fn x(self, f_hz: f64) -> f64 {
        if self.log {
            f_hz.max(1e-3).log10()
        } else {
            f_hz
        }
    }

    /// Frequency of a plotted abscissa.
    pub fn f(self, x: f64) -> f64 {
        if self.log { 10f64.powf(x) } else { x }
    }

    /// Axis label.
    pub fn label(self) -> &'static str {
        "frequency (Hz)"
    }

    /// Tick label for a grid mark.
    pub fn tick(self, m: GridMark) -> String {
        let f = self.f(m.value);
        if self.log {
            if f >= 10.0 {
                format!("{f:.0}")
            } else {
                format!("{f:.1}")
            }
        } else {
            tick_label(m, &(0.0..=0.0))
        }
    }

    /// Applies the axis to a plot (log grid and labels when logarithmic).
    pub fn configure<'a>(self, plot: egui_plot::Plot<'a>) -> egui_plot::Plot<'a> {
        let plot = plot
            .x_axis_label(if self.log {
                "frequency (Hz, log scale)"
            } else {
                self.label()
            })
            .x_axis_formatter(move |m, _| self.tick(m));
        if self.log {
            plot.x_grid_spacer(egui_plot::log_grid_spacer(10))
        } else {
            plot
        }
    }
}

impl Scratch {
    /// `y(f)` reduced to the plot's pixel columns over the visible range, mapped through the
    /// frequency axis, as owned points (the reduction is what keeps 40 overlaid FRFs cheap).
    pub fn reduced(
        &mut self,
        freq_hz: &[f64],
        y: impl Fn(usize) -> f64,
        axis: FreqAxis,
        bounds: Option<PlotBounds>,
        columns: usize,
    ) -> PlotPoints<'static> {
        // Reduce in plotted coordinates so log axes get even pixel columns.
        self.xs.clear();
        self.xs.extend(freq_hz.iter().map(|&f| axis.x(f)));
        self.ys.clear();
        self.ys.extend((0..freq_hz.len()).map(y));
        let (xs, ys) = (std::mem::take(&mut self.xs), std::mem::take(&mut self.ys));
        let out = self.reduced_time(&xs, &ys, bounds, columns);
        (self.xs, self.ys) = (xs, ys);
        out
    }

    /// Points `y(x)` (x ascending, plotted units) reduced to pixel columns over the visible range.
    pub fn reduced_time(
        &mut self,
        t: &[f64],
        y: &[f64],
        bounds: Option<PlotBounds>,
        columns: usize,
    ) -> PlotPoints<'static> {
        let range = match bounds {
            Some(b) if b.is_valid() => [b.min()[0], b.max()[0]],
            _ => [
                t.first().copied().unwrap_or(0.0),
                t.last().copied().unwrap_or(1.0),
            ],
        };
        let columns = if self.mode == PlotMode::Full {
            usize::MAX / 4
        } else {
            columns.max(16)
        };
        reduce::min_max(t, y, range, columns, &mut self.buf);
        PlotPoints::Owned(
            self.buf
                .iter()
                .map(|p| PlotPoint::new(p[0], p[1]))
                .collect(),
        )
    }
}

/// Draws a plot of several traces over common abscissae: the highlighted one (if any) as a
/// plot line with hover, the others through `cache` (or as lines, per `scratch.mode`).
/// `value(i, k)` is trace `i`'s plotted ordinate at line `k`; `extra` adds markers.
#[allow(clippy::too_many_arguments)]
pub fn overlaid(
    ui: &mut egui::Ui,
    plot: egui_plot::Plot<'_>,
    id: egui::Id,
    scratch: &mut Scratch,
    cache: &mut OverlayCache,
    stamp: u64,
    freq_hz: &[f64],
    axis: FreqAxis,
    traces: &[(usize, String, Color32)],
    highlight: Option<usize>,
    value: &dyn Fn(usize, usize) -> f64,
    extra: impl FnOnce(&mut egui_plot::PlotUi<'_>),
) -> egui_plot::PlotTransform {
    let bounds = last_bounds(ui.ctx(), id);
    let columns = ui.available_width() as usize;
    let nk = freq_hz.len();
    let [y0, y1] = cache.extent(stamp, || {
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for (i, _, _) in traces {
            for k in 0..nk {
                let v = value(*i, k);
                if v.is_finite() {
                    lo = lo.min(v);
                    hi = hi.max(v);
                }
            }
        }
        if lo.is_finite() { [lo, hi] } else { [0.0, 1.0] }
    });
    let mut lines = Vec::new();
    for (i, name, color) in traces {
        let as_line = scratch.mode != PlotMode::Cached || Some(*i) == highlight;
        if as_line {
            let pts = scratch.reduced(freq_hz, |k| value(*i, k), axis, bounds, columns);
            lines.push((name.clone(), pts, *color, Some(*i) == highlight));
        }
    }
    let r = plot
        .include_y(y0)
        .include_y(y1)
        .include_x(axis.x(freq_hz.first().copied().unwrap_or(1.0)))
        .include_x(axis.x(freq_hz.last().copied().unwrap_or(2.0)))
        .show(ui, |p| {
            for (name, pts, c, hl) in lines {
                p.line(
                    egui_plot::Line::new(name, pts)
                        .color(c)
                        .width(if hl { 2.0 } else { 1.0 }),
                );
            }
            extra(p);
        });
    keep_bounds(ui.ctx(), id, *r.transform.bounds());
    if scratch.mode == PlotMode::Cached {
        let xs: Vec<f64> = freq_hz.iter().map(|&f| axis.x(f)).collect();
        let others: Vec<(usize, Color32)> = traces
            .iter()
            .filter(|t| Some(t.0) != highlight)
            .map(|t| (t.0, t.2))
            .collect();
        if !others.is_empty() {
            cache.paint(ui, &r.transform, stamp, &xs, || {
                others
                    .iter()
                    .map(|&(i, c)| ((0..nk).map(|k| value(i, k)).collect(), c))
                    .collect()
            });
        }
    }
    r.transform
}

/// A stamp for cached pictures from anything hashable.
pub fn stamp(parts: impl std::hash::Hash) -> u64 {
    use std::hash::Hasher;
    let mut h = std::collections::hash_map::DefaultHasher::new();
    parts.hash(&mut h);
    h.finish()
}

/// dB of a magnitude, guarded against zero.
pub fn db(v: f64) -> f64 {
    20.0 * v.max(1e-30).log10()
}

/// The bounds a plot had in the previous frame (for pixel-column reduction), kept in egui memory.
pub fn last_bounds(ctx: &egui::Context, id: egui::Id) -> Option<PlotBounds> {
    ctx.data(|d| d.get_temp::<PlotBounds>(id))
}

/// Remembers a plot's bounds for the next frame.
pub fn keep_bounds(ctx: &egui::Context, id: egui::Id, b: PlotBounds) {
    ctx.data_mut(|d| d.insert_temp(id, b));
}

/// Many overlaid traces drawn once into a texture and shown as one image until the data, the
/// plot's bounds or its size change. Tessellating 40 FRFs of thousands of lines every frame
/// costs far more than the rest of the window; the picture only changes on pan, zoom or a new
/// analysis.
#[derive(Default)]
pub struct OverlayCache {
    extent: Option<(u64, [f64; 2])>,
    key: Option<u64>,
    texture: Option<egui::TextureHandle>,
    buf: Vec<[f32; 4]>,
    pts: Vec<[f64; 2]>,
}

/// One trace for an [`OverlayCache`]: ordinates in plot units and a colour.
pub type Trace = (Vec<f64>, Color32);

impl OverlayCache {
    /// The y range of the data of `stamp`, computed once per stamp.
    pub fn extent(&mut self, stamp: u64, compute: impl FnOnce() -> [f64; 2]) -> [f64; 2] {
        match self.extent {
            Some((s, e)) if s == stamp => e,
            _ => {
                let e = compute();
                self.extent = Some((stamp, e));
                e
            }
        }
    }

    /// Paints the traces `make` returns (abscissae `x` shared, ascending) over the plot whose
    /// frame and bounds `transform` describes. `make` runs only when `stamp`, the bounds or the
    /// size changed.
    pub fn paint(
        &mut self,
        ui: &egui::Ui,
        transform: &egui_plot::PlotTransform,
        stamp: u64,
        x: &[f64],
        make: impl FnOnce() -> Vec<Trace>,
    ) {
        use std::hash::{Hash, Hasher};
        let frame = *transform.frame();
        let ppp = ui.ctx().pixels_per_point();
        let (w, h) = (
            (frame.width() * ppp).round().max(1.0) as usize,
            (frame.height() * ppp).round().max(1.0) as usize,
        );
        let b = transform.bounds();
        let mut hasher = std::collections::hash_map::DefaultHasher::new();
        (stamp, w, h).hash(&mut hasher);
        for v in [b.min()[0], b.min()[1], b.max()[0], b.max()[1]] {
            v.to_bits().hash(&mut hasher);
        }
        let key = hasher.finish();
        if self.key != Some(key) || self.texture.is_none() {
            if std::env::var_os("TAPGRID_DEBUG_OVERLAY").is_some() {
                eprintln!("overlay rebuild {w}x{h} bounds {:?} stamp {stamp}", b);
            }
            let traces = make();
            self.rasterise(transform, w, h, ppp, x, &traces);
            let image = egui::ColorImage::new(
                [w, h],
                self.buf
                    .iter()
                    .map(|p| {
                        let c = |v: f32| (v.clamp(0.0, 1.0) * 255.0).round() as u8;
                        Color32::from_rgba_premultiplied(c(p[0]), c(p[1]), c(p[2]), c(p[3]))
                    })
                    .collect(),
            );
            match &mut self.texture {
                Some(t) => t.set(image, egui::TextureOptions::LINEAR),
                None => {
                    self.texture = Some(ui.ctx().load_texture(
                        "tapgrid-overlay",
                        image,
                        egui::TextureOptions::LINEAR,
                    ))
                }
            }
            self.key = Some(key);
        }
        if let Some(t) = &self.texture {
            ui.painter_at(frame).image(
                t.id(),
                frame,
                egui::Rect::from_min_max(egui::pos2(0.0, 0.0), egui::pos2(1.0, 1.0)),
                Color32::WHITE,
            );
        }
    }

    fn rasterise(
        &mut self,
        transform: &egui_plot::PlotTransform,
        w: usize,
        h: usize,
        ppp: f32,
        x: &[f64],
        traces: &[Trace],
    ) {
        self.buf.clear();
        self.buf.resize(w * h, [0.0; 4]);
        let frame = *transform.frame();
        let b = transform.bounds();
        for (y, color) in traces {
            // One min/max pair per pixel column keeps every peak and bounds the work.
            reduce::min_max(x, y, [b.min()[0], b.max()[0]], w, &mut self.pts);
            let [r, g, bl, a] = color.to_normalized_gamma_f32();
            let un = |v: f32| if a > 0.0 { v / a } else { 0.0 };
            let rgba = [un(r), un(g), un(bl), a];
            let to_px = |p: [f64; 2]| {
                let s = transform.position_from_point(&PlotPoint::new(p[0], p[1]));
                ((s.x - frame.left()) * ppp, (s.y - frame.top()) * ppp)
            };
            for seg in self.pts.windows(2) {
                let (a, c) = (to_px(seg[0]), to_px(seg[1]));
                wu_line(&mut self.buf, w, h, a, c, rgba);
            }
        }
    }
}

/// An anti-aliased line (Xiaolin Wu 1991) composited "over" into a premultiplied RGBA buffer.
fn wu_line(buf: &mut [[f32; 4]], w: usize, h: usize, p0: (f32, f32), p1: (f32, f32), c: [f32; 4]) {
    if !(p0.0.is_finite() && p0.1.is_finite() && p1.0.is_finite() && p1.1.is_finite()) {
        return;
    }
    let steep = (p1.1 - p0.1).abs() > (p1.0 - p0.0).abs();
    let (mut a, mut b) = if steep {
        ((p0.1, p0.0), (p1.1, p1.0))
    } else {
        (p0, p1)
    };
    if a.0 > b.0 {
        std::mem::swap(&mut a, &mut b);
    }
    let (major_len, minor_len) = if steep { (h, w) } else { (w, h) };
    let dx = b.0 - a.0;
    let grad = if dx.abs() < 1e-6 {
        0.0
    } else {
        (b.1 - a.1) / dx
    };
    let x_start = a.0.round().max(0.0);
    let x_end = b.0.round().min(major_len as f32 - 1.0);
    if x_start > x_end {
        return;
    }
    let mut y = a.1 + grad * (x_start - a.0);
    let mut plot = |major: i64, minor: i64, cover: f32| {
        if minor < 0 || minor >= minor_len as i64 || major < 0 || major >= major_len as i64 {
            return;
        }
        let (px, py) = if steep {
            (minor, major)
        } else {
            (major, minor)
        };
        let alpha = c[3] * cover;
        let d = &mut buf[py as usize * w + px as usize];
        for k in 0..3 {
            d[k] = c[k] * alpha + d[k] * (1.0 - alpha);
        }
        d[3] = alpha + d[3] * (1.0 - alpha);
    };
    let mut x = x_start as i64;
    while x as f32 <= x_end {
        let yf = y.floor();
        let fr = y - yf;
        plot(x, yf as i64, 1.0 - fr);
        plot(x, yf as i64 + 1, fr);
        y += grad;
        x += 1;
    }
}

/// A matrix of values in 0…1 as coloured cells (MAC), `rows` × `cols` labelled; the highlighted
/// row and column are outlined. Returns the cell clicked (row, column).
#[allow(clippy::needless_range_loop)] // i and j index rows, columns and screen cells alike
pub fn heat_map(
    ui: &mut egui::Ui,
    values: &[Vec<f64>],
    rows: &[String],
    cols: &[String],
    highlight: (Option<usize>, Option<usize>),
) -> Option<(usize, usize)> {
    use egui::{Align2, FontId, Sense, Stroke, pos2, vec2};
    let (n, m) = (rows.len(), cols.len());
    if n == 0 || m == 0 {
        return None;
    }
    let cell = ((ui.available_width() - 34.0) / m as f32).clamp(18.0, 48.0);
    let (r, painter) = ui.allocate_painter(
        vec2(34.0 + cell * m as f32, 24.0 + cell * n as f32),
        Sense::click(),
    );
    let o = r.rect.min + vec2(34.0, 24.0);
    let lo = Color32::from_rgb(30, 40, 70);
    let hi = Color32::from_rgb(240, 200, 80);
    let text = ui.visuals().text_color();
    for (i, l) in rows.iter().enumerate() {
        painter.text(
            pos2(o.x - 6.0, o.y + (i as f32 + 0.5) * cell),
            Align2::RIGHT_CENTER,
            l,
            FontId::proportional(13.0),
            text,
        );
    }
    for (j, l) in cols.iter().enumerate() {
        painter.text(
            pos2(o.x + (j as f32 + 0.5) * cell, o.y - 4.0),
            Align2::CENTER_BOTTOM,
            l,
            FontId::proportional(13.0),
            text,
        );
    }
    for i in 0..n {
        for j in 0..m {
            let v = values
                .get(i)
                .and_then(|row| row.get(j))
                .copied()
                .unwrap_or(0.0)
                .clamp(0.0, 1.0) as f32;
            let rect = egui::Rect::from_min_size(
                o + vec2(j as f32 * cell, i as f32 * cell),
                vec2(cell, cell),
            );
            painter.rect_filled(rect.shrink(1.0), 2.0, lerp(lo, hi, v));
            if highlight.0 == Some(i) || highlight.1 == Some(j) {
                painter.rect_stroke(
                    rect.shrink(1.0),
                    2.0,
                    Stroke::new(1.0, accent()),
                    egui::StrokeKind::Inside,
                );
            }
            if cell >= 30.0 {
                let tc = if v > 0.5 {
                    Color32::BLACK
                } else {
                    Color32::WHITE
                };
                painter.text(
                    rect.center(),
                    Align2::CENTER_CENTER,
                    format!("{v:.2}"),
                    FontId::proportional(11.0),
                    tc,
                );
            }
        }
    }
    let p = r.interact_pointer_pos().filter(|_| r.clicked())?;
    let (j, i) = ((p.x - o.x) / cell, (p.y - o.y) / cell);
    (i >= 0.0 && j >= 0.0 && (i as usize) < n && (j as usize) < m)
        .then_some((i as usize, j as usize))
}

fn lerp(a: Color32, b: Color32, t: f32) -> Color32 {
    let m = |x: u8, y: u8| (x as f32 + (y as f32 - x as f32) * t).round() as u8;
    Color32::from_rgb(m(a.r(), b.r()), m(a.g(), b.g()), m(a.b(), b.b()))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn labelled(lo: f64, hi: f64, px: f64, label_px: f64) -> Vec<f64> {
        let base = (hi - lo) / px * GRID_MIN_PX;
        let marks = nice_grid(
            egui_plot::GridInput {
                bounds: (lo, hi),
                base_step_size: base,
            },
            label_px,
        );
        let px_per_unit = px / (hi - lo);
        marks
            .into_iter()
            .filter(|m| m.step_size * px_per_unit >= label_px)
            .map(|m| m.value)
            .collect()
    }

    /// A 130 px dB axis over ±40 dB gets a label every 20 dB (the toolkit's decade ladder gave
    /// only "0"); a 400 px axis over 0–0.9 m gets one every 0.2 m. Common practice: tick labels
    /// on 1-2-5 steps.
    #[test]
    fn short_axes_get_labels_on_a_1_2_5_ladder() {
        assert_eq!(
            labelled(-45.0, 45.0, 130.0, Y_LABEL_PX),
            vec![-40.0, -20.0, 0.0, 20.0, 40.0]
        );
        let x = labelled(-0.05, 0.95, 400.0, X_LABEL_PX);
        assert_eq!(x.len(), 5, "{x:?}");
        assert!((x[1] - 0.2).abs() < 1e-12);
        let m = GridMark {
            value: 0.30000000000000004,
            step_size: 0.1,
        };
        assert_eq!(tick_label(m, &(0.0..=1.0)), "0.3");
        let m = GridMark {
            value: 1500.0,
            step_size: 500.0,
        };
        assert_eq!(tick_label(m, &(0.0..=1.0)), "1500");
    }
}
