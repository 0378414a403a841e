//! Plot helpers shared by the views: colours, pixel-density reduction, frequency axes.

use eframe::egui::{self, Color32};
use egui_plot::{GridMark, PlotBounds, PlotPoint, PlotPoints};

use super::reduce;

/// Good (accepted) — a blue-green that stays apart from the warning colours for most colour vision.
pub const GOOD: Color32 = Color32::from_rgb(38, 166, 154);
/// A problem (rejected hit, failed fit).
pub const BAD: Color32 = Color32::from_rgb(230, 97, 60);
/// Needs a look (accepted with warnings, overridden).
pub const WARN: Color32 = Color32::from_rgb(232, 178, 48);
/// Not measured.
pub const IDLE: Color32 = Color32::from_rgb(128, 128, 128);
/// Highlight (current station, selected mode).
pub const ACCENT: Color32 = Color32::from_rgb(86, 140, 230);

/// A colour per overlaid trace, spread around the hue circle by the golden angle.
pub fn trace_color(i: usize) -> Color32 {
    let h = (0.58 + i as f32 * 0.381_966) % 1.0;
    egui::ecolor::Hsva::new(h, 0.6, 0.85, 1.0).into()
}

/// Reusable buffers, so frames do not allocate per trace.
#[derive(Default)]
pub struct Scratch {
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
        if f >= 1000.0 {
            format!("{:.0}", f)
        } else if f >= 10.0 {
            format!("{:.0}", f)
        } else {
            format!("{:.1}", f)
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
        let (xs, ys) = (&self.xs, &self.ys);
        let range = match bounds {
            Some(b) if b.is_valid() => [b.min()[0], b.max()[0]],
            _ => [
                xs.first().copied().unwrap_or(0.0),
                xs.last().copied().unwrap_or(1.0),
            ],
        };
        reduce::min_max(xs, ys, range, columns.max(16), &mut self.buf);
        PlotPoints::Owned(
            self.buf
                .iter()
                .map(|p| PlotPoint::new(p[0], p[1]))
                .collect(),
        )
    }

    /// A time trace reduced to pixel columns.
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
        reduce::min_max(t, y, range, columns.max(16), &mut self.buf);
        PlotPoints::Owned(
            self.buf
                .iter()
                .map(|p| PlotPoint::new(p[0], p[1]))
                .collect(),
        )
    }
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
