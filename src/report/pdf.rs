//! The report as a printable PDF (A4): the test record, cautions, setup, hits, FRFs, modes and
//! their shapes, the model's correlation and margins, the rotor at speed, the runs, and a
//! sign-off block — written with `pdf-writer` and the standard Helvetica fonts (nothing to
//! install or embed; text outside Latin-1 is spelled out: ζ as "zeta", Δ as "d"), each page's
//! drawing deflated.

use std::path::Path;

use pdf_writer::{Content, Filter, Finish, Name, Pdf, Rect, Ref, Str};

use super::document::ReportInput;
use super::svg::{Frame, Series, ticks};
use crate::acquire::InputError;
use crate::cautions::CAUTIONS;

const W: f32 = 595.0;
const H: f32 = 842.0;
const MARGIN: f32 = 50.0;
const BOTTOM: f32 = 62.0;

/// Text in the fonts' WinAnsi encoding; characters it lacks are spelled out.
fn encode(text: &str) -> Vec<u8> {
    let mut out = Vec::with_capacity(text.len());
    for c in text.chars() {
        let sub: Option<&str> = match c {
            'ζ' => Some("zeta"),
            'Δ' | 'δ' => Some("d"),
            'ω' => Some("w"),
            'Ω' => Some("Omega"),
            'γ' => Some("gamma"),
            'λ' => Some("lambda"),
            'φ' => Some("phi"),
            'π' => Some("pi"),
            'σ' => Some("sigma"),
            '−' => Some("-"),
            '≥' => Some(">="),
            '≤' => Some("<="),
            '≈' => Some("~"),
            '√' => Some("sqrt"),
            '∞' => Some("inf"),
            '→' => Some("->"),
            '←' => Some("<-"),
            '₂' => Some("2"),
            '₁' => Some("1"),
            '\u{307}' => Some(""),
            _ => None,
        };
        if let Some(s) = sub {
            out.extend_from_slice(s.as_bytes());
            continue;
        }
        let b = match c {
            ' '..='~' => c as u8,
            '–' => 0x96,
            '—' => 0x97,
            '…' => 0x85,
            '‘' => 0x91,
            '’' => 0x92,
            '“' => 0x93,
            '”' => 0x94,
            '•' => 0x95,
            '\u{a0}'..='\u{ff}' => c as u32 as u8,
            _ => b'?',
        };
        out.push(b);
    }
    out
}

/// Approximate Helvetica advance width of a byte, in 1/1000 em (the standard metrics, rounded).
fn advance(b: u8) -> f32 {
    match b {
        b'i' | b'j' | b'l' | b'\'' | b'|' => 222.0,
        b' ' | b'!' | b',' | b'.' | b':' | b';' | b'I' | b'f' | b't' | b'/' | b'[' | b']' => 278.0,
        b'r' | b'(' | b')' | b'-' => 333.0,
        b'm' | b'M' => 833.0,
        b'w' => 722.0,
        b'W' => 944.0,
        b'0'..=b'9' | b'a'..=b'h' | b'k' | b'n'..=b'q' | b's' | b'u' | b'v' | b'x'..=b'z' => 556.0,
        b'A'..=b'Z' => 690.0,
        b'%' => 889.0,
        _ => 584.0,
    }
}

fn width(text: &str, size: f32, bold: bool) -> f32 {
    let k = if bold { 1.06 } else { 1.0 };
    encode(text).iter().map(|&b| advance(b)).sum::<f32>() * size / 1000.0 * k
}

/// Lines of at most `max` points wide.
fn wrap(text: &str, size: f32, bold: bool, max: f32) -> Vec<String> {
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        let trial = if line.is_empty() {
            word.to_string()
        } else {
            format!("{line} {word}")
        };
        if width(&trial, size, bold) > max && !line.is_empty() {
            lines.push(std::mem::take(&mut line));
            line = word.to_string();
        } else {
            line = trial;
        }
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

fn rgb(css: &str) -> (f32, f32, f32) {
    let h = css.trim_start_matches('#');
    let v = |i: usize| {
        u8::from_str_radix(h.get(i..i + 2).unwrap_or("00"), 16).unwrap_or(0) as f32 / 255.0
    };
    (v(0), v(2), v(4))
}

/// A flowing A4 document.
struct Doc {
    pages: Vec<Content>,
    page: Content,
    y: f32,
}

impl Doc {
    fn new() -> Self {
        Self {
            pages: Vec::new(),
            page: Content::new(),
            y: H - MARGIN,
        }
    }

    fn new_page(&mut self) {
        let done = std::mem::replace(&mut self.page, Content::new());
        self.pages.push(done);
        self.y = H - MARGIN;
    }

    fn room(&mut self, h: f32) {
        if self.y - h < BOTTOM {
            self.new_page();
        }
    }

    fn text_at(&mut self, x: f32, y: f32, size: f32, bold: bool, text: &str) {
        let font = if bold { Name(b"F2") } else { Name(b"F1") };
        let bytes = encode(text);
        self.page
            .begin_text()
            .set_font(font, size)
            .next_line(x, y)
            .show(Str(&bytes))
            .end_text();
    }

    fn para(&mut self, text: &str, size: f32, bold: bool) {
        let lead = size * 1.3;
        for line in wrap(text, size, bold, W - 2.0 * MARGIN) {
            self.room(lead);
            self.y -= lead;
            self.text_at(MARGIN, self.y, size, bold, &line);
        }
        self.y -= size * 0.4;
    }

    fn heading(&mut self, text: &str) {
        self.room(60.0);
        self.y -= 10.0;
        self.para(text, 13.0, true);
        self.page
            .set_stroke_rgb(0.6, 0.6, 0.6)
            .set_line_width(0.5)
            .move_to(MARGIN, self.y + 2.0)
            .line_to(W - MARGIN, self.y + 2.0)
            .stroke();
        self.y -= 4.0;
    }

    /// A table; `widths` are fractions of the text width. Cells are wrapped.
    fn table(&mut self, header: &[&str], rows: &[Vec<String>], widths: &[f32]) {
        let size = 8.5;
        let lead = size * 1.25;
        let total = W - 2.0 * MARGIN;
        let cols: Vec<f32> = widths.iter().map(|w| w * total).collect();
        let draw_row = |doc: &mut Doc, cells: &[String], bold: bool| {
            let wrapped: Vec<Vec<String>> = cells
                .iter()
                .zip(&cols)
                .map(|(c, w)| wrap(c, size, bold, w - 6.0))
                .collect();
            let n = wrapped.iter().map(|l| l.len().max(1)).max().unwrap_or(1);
            let h = n as f32 * lead + 4.0;
            doc.room(h);
            let top = doc.y;
            let mut x = MARGIN;
            for (lines, w) in wrapped.iter().zip(&cols) {
                for (k, line) in lines.iter().enumerate() {
                    doc.text_at(
                        x + 3.0,
                        top - 2.0 - (k as f32 + 1.0) * lead + 2.5,
                        size,
                        bold,
                        line,
                    );
                }
                x += w;
            }
            doc.y -= h;
            doc.page
                .set_stroke_rgb(0.8, 0.8, 0.8)
                .set_line_width(0.4)
                .move_to(MARGIN, doc.y)
                .line_to(W - MARGIN, doc.y)
                .stroke();
        };
        if header.iter().any(|h| !h.is_empty()) {
            let head: Vec<String> = header.iter().map(|s| s.to_string()).collect();
            draw_row(self, &head, true);
        }
        for r in rows {
            draw_row(self, r, false);
        }
        self.y -= 6.0;
    }

    /// Text in a shaded, outlined box.
    fn caution(&mut self, lines: &[String]) {
        let size = 8.5;
        let lead = size * 1.3;
        let wrapped: Vec<String> = lines
            .iter()
            .flat_map(|l| wrap(l, size, false, W - 2.0 * MARGIN - 16.0))
            .collect();
        let h = wrapped.len() as f32 * lead + 10.0;
        self.room(h);
        self.page
            .set_fill_rgb(1.0, 0.965, 0.925)
            .set_stroke_rgb(0.7, 0.35, 0.0)
            .set_line_width(1.2)
            .rect(MARGIN, self.y - h, W - 2.0 * MARGIN, h)
            .fill_nonzero_and_stroke()
            .set_fill_rgb(0.0, 0.0, 0.0);
        let mut y = self.y - 4.0;
        for l in &wrapped {
            y -= lead;
            self.text_at(MARGIN + 8.0, y + 2.0, size, false, l);
        }
        self.y -= h + 8.0;
    }

    /// A line plot of `series` in a frame `height` points tall across the text width.
    fn plot(&mut self, frame: &Frame, series: &[Series], height: f32) {
        self.room(height + 6.0);
        let (left, right, top, bottom) = (46.0, 10.0, 6.0, 28.0);
        let x0 = MARGIN + left;
        let x1 = W - MARGIN - right;
        let y1 = self.y - top;
        let y0 = self.y - height + bottom;
        let pts = series.iter().flat_map(|s| s.points.iter());
        let (mut xlo, mut xhi, mut ylo, mut yhi) = (
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
        );
        for p in pts.filter(|p| p[0].is_finite() && p[1].is_finite()) {
            xlo = xlo.min(p[0]);
            xhi = xhi.max(p[0]);
            ylo = ylo.min(p[1]);
            yhi = yhi.max(p[1]);
        }
        if let Some([a, b]) = frame.x_range {
            (xlo, xhi) = (a, b);
        }
        if let Some([a, b]) = frame.y_range {
            (ylo, yhi) = (a, b);
        }
        if !(xlo.is_finite() && xhi > xlo) {
            (xlo, xhi) = (0.0, 1.0);
        }
        if !(ylo.is_finite() && yhi.is_finite()) {
            (ylo, yhi) = (0.0, 1.0);
        }
        if yhi <= ylo {
            (ylo, yhi) = (ylo - 1.0, yhi + 1.0);
        } else if frame.y_range.is_none() {
            let pad = 0.05 * (yhi - ylo);
            (ylo, yhi) = (ylo - pad, yhi + pad);
        }
        let px = |x: f64| x0 + ((x - xlo) / (xhi - xlo)) as f32 * (x1 - x0);
        let py = |y: f64| y0 + ((y - ylo) / (yhi - ylo)) as f32 * (y1 - y0);
        let c = &mut self.page;
        c.set_stroke_rgb(0.85, 0.85, 0.85).set_line_width(0.3);
        let xt = ticks(xlo, xhi, 8);
        let yt = ticks(ylo, yhi, 5);
        for &t in &xt {
            c.move_to(px(t), y0).line_to(px(t), y1).stroke();
        }
        for &t in &yt {
            c.move_to(x0, py(t)).line_to(x1, py(t)).stroke();
        }
        for (b, _) in &frame.x_bands {
            let (a, z) = (px(b[0].max(xlo)), px(b[1].min(xhi)));
            if z > a {
                c.set_fill_rgb(0.9, 0.93, 1.0)
                    .rect(a, y0, z - a, y1 - y0)
                    .fill_nonzero();
            }
        }
        c.set_fill_rgb(0.0, 0.0, 0.0);
        c.save_state()
            .rect(x0, y0, x1 - x0, y1 - y0)
            .clip_nonzero()
            .end_path();
        if frame.zero_line && ylo < 0.0 && yhi > 0.0 {
            c.set_stroke_rgb(0.5, 0.5, 0.5)
                .set_line_width(0.6)
                .move_to(x0, py(0.0))
                .line_to(x1, py(0.0))
                .stroke();
        }
        for s in series {
            let (r, g, b) = rgb(s.colour);
            c.set_stroke_rgb(r, g, b)
                .set_fill_rgb(r, g, b)
                .set_line_width((s.width as f32).max(0.5) * 0.7);
            if s.dashed {
                c.set_dash_pattern([3.0, 2.0], 0.0);
            }
            let mut first = true;
            if s.width > 0.0 {
                for p in &s.points {
                    if !(p[0].is_finite() && p[1].is_finite()) {
                        first = true;
                        continue;
                    }
                    if first {
                        c.move_to(px(p[0]), py(p[1]));
                        first = false;
                    } else {
                        c.line_to(px(p[0]), py(p[1]));
                    }
                }
                if !first {
                    c.stroke();
                }
            }
            if s.dashed {
                c.set_dash_pattern([], 0.0);
            }
            if s.markers {
                for p in s
                    .points
                    .iter()
                    .filter(|p| p[0].is_finite() && p[1].is_finite())
                {
                    c.rect(px(p[0]) - 1.8, py(p[1]) - 1.8, 3.6, 3.6)
                        .fill_nonzero();
                }
            }
        }
        c.set_stroke_rgb(0.7, 0.35, 0.0)
            .set_line_width(0.6)
            .set_dash_pattern([2.0, 2.0], 0.0);
        for (x, _) in &frame.x_marks {
            if *x >= xlo && *x <= xhi {
                c.move_to(px(*x), y0).line_to(px(*x), y1).stroke();
            }
        }
        c.set_dash_pattern([], 0.0);
        c.restore_state();
        c.set_stroke_rgb(0.4, 0.4, 0.4)
            .set_line_width(0.6)
            .rect(x0, y0, x1 - x0, y1 - y0)
            .stroke()
            .set_fill_rgb(0.0, 0.0, 0.0);
        let step = |t: &[f64]| if t.len() > 1 { t[1] - t[0] } else { 1.0 };
        let label = |v: f64, st: f64| {
            let d = if st >= 1.0 {
                0
            } else {
                (-st.log10().floor()) as usize
            };
            let v = if v.abs() < 1e-9 * st { 0.0 } else { v };
            format!("{v:.d$}")
        };
        let (sx, sy) = (step(&xt), step(&yt));
        for &t in &xt {
            let s = label(t, sx);
            let w = width(&s, 7.0, false);
            self.text_at(px(t) - w / 2.0, y0 - 9.0, 7.0, false, &s);
        }
        for &t in &yt {
            let s = label(t, sy);
            let w = width(&s, 7.0, false);
            self.text_at(x0 - 3.0 - w, py(t) - 2.5, 7.0, false, &s);
        }
        for (x, text) in &frame.x_marks {
            if *x >= xlo && *x <= xhi {
                self.text_at(px(*x) + 2.0, y1 - 8.0, 6.5, false, text);
            }
        }
        let w = width(&frame.x_label, 7.5, false);
        self.text_at((x0 + x1 - w) / 2.0, y0 - 20.0, 7.5, false, &frame.x_label);
        self.text_at(MARGIN, y1 + 1.0, 7.5, false, &frame.y_label);
        self.y -= height + 4.0;
    }

    fn finish(mut self, footer: &str) -> Vec<u8> {
        self.new_page();
        let mut pdf = Pdf::new();
        let catalog = Ref::new(1);
        let tree = Ref::new(2);
        let (f1, f2) = (Ref::new(3), Ref::new(4));
        let n = self.pages.len();
        let page_ids: Vec<Ref> = (0..n).map(|i| Ref::new(5 + 2 * i as i32)).collect();
        pdf.catalog(catalog).pages(tree);
        pdf.pages(tree)
            .kids(page_ids.iter().copied())
            .count(n as i32);
        for (font, name) in [(f1, &b"Helvetica"[..]), (f2, &b"Helvetica-Bold"[..])] {
            pdf.type1_font(font)
                .base_font(Name(name))
                .encoding_predefined(Name(b"WinAnsiEncoding"));
        }
        for (i, mut content) in self.pages.into_iter().enumerate() {
            let text = format!("{footer} — page {} of {n}", i + 1);
            let bytes = encode(&text);
            content
                .set_fill_rgb(0.35, 0.35, 0.35)
                .begin_text()
                .set_font(Name(b"F1"), 7.5)
                .next_line(MARGIN, 30.0)
                .show(Str(&bytes))
                .end_text();
            let id = page_ids[i];
            let cid = Ref::new(id.get() + 1);
            let mut page = pdf.page(id);
            page.media_box(Rect::new(0.0, 0.0, W, H))
                .parent(tree)
                .contents(cid);
            page.resources()
                .fonts()
                .pair(Name(b"F1"), f1)
                .pair(Name(b"F2"), f2);
            page.finish();
            // Deflated: an FRF page of plain drawing operators shrinks about fivefold.
            let data = miniz_oxide::deflate::compress_to_vec_zlib(&content.finish(), 6);
            pdf.stream(cid, &data).filter(Filter::FlateDecode);
        }
        pdf.finish()
    }
}

fn pct(v: Option<f64>) -> String {
    v.map_or("—".into(), |z| format!("{:.3}", 100.0 * z))
}

/// The report as PDF bytes.
pub fn pdf(r: &ReportInput) -> Vec<u8> {
    let mut d = Doc::new();
    let a = r.analysis;
    let title = super::document::title(r);
    d.para(&format!("{title} — impact test report"), 17.0, true);
    d.para(
        &format!(
            "Written {} by tapgrid {} from {}.",
            r.written_utc,
            env!("CARGO_PKG_VERSION"),
            r.source.display()
        ),
        8.5,
        false,
    );
    // The record.
    let empty = crate::session::ReportInfo::default();
    let info = r.info.unwrap_or(&empty);
    let blank = |v: &str| {
        if v.trim().is_empty() {
            "(not entered)".to_string()
        } else {
            v.to_string()
        }
    };
    d.heading("Test record");
    let date = if info.test_date.trim().is_empty() {
        format!("(not entered; report written {})", r.written_utc)
    } else {
        info.test_date.clone()
    };
    d.table(
        &["", ""],
        &[
            vec!["tested by".into(), blank(&info.operator)],
            vec!["site".into(), blank(&info.site)],
            vec!["test date".into(), date],
            vec!["part held by".into(), blank(&info.support)],
            vec!["signal conditioning".into(), blank(&info.conditioning)],
        ],
        &[0.28, 0.72],
    );
    if info.instruments.is_empty() {
        d.para(
            "No instruments were entered (hammer, tip, accelerometers with serial numbers and \
             calibration dates).",
            8.5,
            false,
        );
    } else {
        let rows: Vec<Vec<String>> = info
            .instruments
            .iter()
            .map(|x| {
                vec![
                    x.role.clone(),
                    x.model.clone(),
                    x.serial.clone(),
                    x.calibrated.clone(),
                    x.sensitivity.clone(),
                ]
            })
            .collect();
        d.table(
            &[
                "instrument",
                "make and model",
                "serial",
                "calibrated",
                "sensitivity",
            ],
            &rows,
            &[0.2, 0.26, 0.16, 0.16, 0.22],
        );
    }
    let mut cautions: Vec<String> = vec!["Read first.".into()];
    cautions.extend(CAUTIONS.iter().map(|c| format!("• {c}")));
    d.caution(&cautions);
    // Setup.
    let st = &a.setup;
    let [lo, hi] = st.band(a.sample_rate_hz);
    d.heading("Test setup");
    d.table(
        &["", ""],
        &[
            vec!["layout".into(), format!("{:?}", st.layout).to_lowercase()],
            vec![
                "channel A".into(),
                format!(
                    "input {}, {} mV per {}",
                    st.channel_a.index,
                    st.channel_a.sensitivity.mv_per_unit,
                    st.layout.channel_a_quantity().si_unit()
                ),
            ],
            vec![
                "channel B".into(),
                format!(
                    "input {}, {} mV per m/s²",
                    st.channel_b.index, st.channel_b.sensitivity.mv_per_unit
                ),
            ],
            vec![
                "full scale".into(),
                format!("{} V at digital ±1", st.full_scale_volts),
            ],
            vec![
                "band".into(),
                format!("{lo:.1} to {hi:.1} Hz at {} Hz sampling", a.sample_rate_hz),
            ],
            vec![
                "reference station".into(),
                st.reference_station
                    .map_or("not set".into(), |s| s.to_string()),
            ],
        ],
        &[0.28, 0.72],
    );
    // Hits.
    d.heading("Hits");
    let rows: Vec<Vec<String>> = a
        .stations
        .iter()
        .map(|s| {
            let acc = s.result.hits.iter().filter(|h| h.accepted).count();
            let mut why: Vec<String> = s
                .result
                .hits
                .iter()
                .filter(|h| !h.accepted)
                .flat_map(|h| h.reasons.iter().map(|r| r.word().to_string()))
                .collect();
            why.sort();
            why.dedup();
            vec![
                s.station.to_string(),
                format!("{:.3}", s.position_m),
                format!("{acc} of {}", s.result.hits.len()),
                why.join(", "),
            ]
        })
        .collect();
    d.table(
        &[
            "station",
            "position (m)",
            "hits kept",
            "why others were rejected",
        ],
        &rows,
        &[0.14, 0.18, 0.16, 0.52],
    );
    // FRFs.
    let frfs: Vec<Series> = a
        .stations
        .iter()
        .filter_map(|s| s.result.frf.as_ref())
        .enumerate()
        .map(|(k, f)| {
            Series::line(
                f.freq_hz
                    .iter()
                    .zip(&f.h)
                    .filter(|(x, _)| **x >= lo && **x <= hi)
                    .map(|(x, h)| [*x, 20.0 * h.norm().max(1e-12).log10()])
                    .collect(),
                [
                    "#1f5fa8", "#8a1f4f", "#2a8a3a", "#a06a00", "#00808a", "#7a3fa0",
                ][k % 6],
                0.8,
            )
        })
        .collect();
    if !frfs.is_empty() {
        d.heading("FRFs");
        d.para(
            "Magnitude of every station's FRF (dB re 1 SI unit per unit of channel A); the \
             fitted modes marked.",
            8.5,
            false,
        );
        let marks: Vec<(f64, String)> = r
            .modes
            .modes
            .iter()
            .map(|m| (m.frequency_hz, format!("{:.0}", m.frequency_hz)))
            .collect();
        d.plot(
            &Frame {
                x_label: "frequency (Hz)".into(),
                y_label: "|FRF| (dB)".into(),
                x_range: Some([lo, hi]),
                x_marks: marks,
                ..Frame::default()
            },
            &frfs,
            230.0,
        );
    }
    // Modes.
    d.heading("Modes");
    if r.modes.modes.is_empty() {
        d.para("No mode was found in the band.", 9.0, false);
    } else {
        let rows: Vec<Vec<String>> = r
            .modes
            .modes
            .iter()
            .enumerate()
            .map(|(k, m)| {
                vec![
                    (k + 1).to_string(),
                    format!("{:.2}", m.frequency_hz),
                    pct(m.damping_ratio),
                    format!("{:.3}", m.mpc),
                    match m.method {
                        crate::modal::Method::Lscf => "LSCF + LSFD".to_string(),
                        other => format!("{other:?}").to_lowercase(),
                    },
                ]
            })
            .collect();
        d.table(
            &["mode", "frequency (Hz)", "damping (%)", "MPC", "method"],
            &rows,
            &[0.1, 0.22, 0.2, 0.16, 0.32],
        );
        for (k, m) in r.modes.modes.iter().enumerate() {
            let shape: Vec<[f64; 2]> = r
                .modes
                .positions_m
                .iter()
                .zip(&m.shape)
                .map(|(x, v)| [*x, v.re])
                .collect();
            let mut line = Series::line(shape, "#1f5fa8", 1.4);
            line.markers = true;
            d.plot(
                &Frame {
                    x_label: format!("position (m) — mode {} at {:.2} Hz", k + 1, m.frequency_hz),
                    y_label: "shape".into(),
                    y_range: Some([-1.1, 1.1]),
                    zero_line: true,
                    ..Frame::default()
                },
                &[line],
                110.0,
            );
        }
    }
    // Model and margins.
    if let Some((_, res)) = r.study {
        if let Some(c) = &res.correlation {
            d.heading("Shaft model");
            let rows: Vec<Vec<String>> = c
                .pairs
                .iter()
                .map(|p| {
                    vec![
                        (p.test + 1).to_string(),
                        format!("{:.2}", p.test_hz),
                        format!("{:.2}", p.model_hz),
                        format!("{:+.2}", p.difference_pct),
                        format!("{:.3}", p.mac),
                    ]
                })
                .collect();
            d.table(
                &[
                    "test mode",
                    "test (Hz)",
                    "model (Hz)",
                    "difference (%)",
                    "MAC",
                ],
                &rows,
                &[0.16, 0.2, 0.2, 0.22, 0.22],
            );
        }
        if !res.margins.is_empty() {
            d.heading("Running-speed margins");
            d.caution(&[crate::cautions::MARGIN_NOTE.to_string()]);
            let lines = res.margins_closest_first();
            const SHOWN: usize = 14;
            let rows: Vec<Vec<String>> = lines
                .iter()
                .take(SHOWN)
                .map(|l| {
                    let c = &l.check;
                    let source = match l.source {
                        crate::model::study::ResonanceSource::Measured => "measured",
                        crate::model::study::ResonanceSource::ModelInService => "model in service",
                        crate::model::study::ResonanceSource::ModelAsTested => "model as tested",
                    };
                    vec![
                        format!("{source} {}", l.mode),
                        format!("{:.1}", c.frequency_hz),
                        format!("{}×", c.order),
                        format!("{:.0}", c.critical_rpm),
                        format!("{:.1}", c.amplification_factor),
                        format!("{:.1}", c.margin_pct),
                        format!("{:.1}", c.required_pct),
                        if c.ok { "clear" } else { "TOO CLOSE" }.into(),
                    ]
                })
                .collect();
            d.table(
                &[
                    "resonance",
                    "f (Hz)",
                    "order",
                    "critical (rpm)",
                    "AF",
                    "margin (%)",
                    "required (%)",
                    "verdict",
                ],
                &rows,
                &[0.2, 0.1, 0.08, 0.14, 0.08, 0.13, 0.14, 0.13],
            );
            if lines.len() > SHOWN {
                d.para(
                    &format!(
                        "{} more lines, each with more margin than those above \
                         (closest calls first; the HTML report lists every line).",
                        lines.len() - SHOWN
                    ),
                    8.5,
                    false,
                );
            }
        }
    }
    if let Some(at) = r.rotor {
        d.heading("Rotor at speed");
        d.caution(&[crate::cautions::ROTOR.to_string()]);
        let rows: Vec<Vec<String>> = at
            .campbell
            .critical_speeds
            .iter()
            .map(|c| {
                vec![
                    format!("{:.0}", c.speed_rpm),
                    format!("{}×", c.order),
                    c.whirl.word().to_string(),
                    format!("{:.2}", c.frequency_hz),
                    format!("{:.4}", c.damping_ratio),
                ]
            })
            .collect();
        d.table(
            &[
                "critical speed (rpm)",
                "order",
                "whirl",
                "frequency (Hz)",
                "damping ratio",
            ],
            &rows,
            &[0.24, 0.12, 0.2, 0.22, 0.22],
        );
        d.para(
            &match at.campbell.stability_threshold_rpm {
                Some(t) => format!("A mode goes unstable from {t:.0} rpm."),
                None => "No mode goes unstable in the range solved.".into(),
            },
            9.0,
            false,
        );
    }
    if !r.runs.is_empty() {
        d.heading("Run-up and coast-down");
        d.caution(&[crate::cautions::RUN.to_string()]);
        for run in r.runs {
            let name = run
                .source
                .path
                .file_name()
                .map_or_else(|| "run".into(), |n| n.to_string_lossy().into_owned());
            match &run.result {
                Err(e) => d.para(&format!("{name}: could not be tracked: {e}"), 9.0, false),
                Ok(res) => {
                    d.para(
                        &format!(
                            "{name}: {} revolutions, {:.0} to {:.0} rpm, {}.",
                            res.revolutions,
                            res.speed_range_rpm[0],
                            res.speed_range_rpm[1],
                            res.direction.word()
                        ),
                        9.0,
                        true,
                    );
                    let rows: Vec<Vec<String>> = res
                        .critical_speeds
                        .iter()
                        .map(|c| {
                            vec![
                                format!("{:.0}", c.speed_rpm),
                                format!("{}×", c.order),
                                format!("{:.1}", c.amplification_factor),
                                c.amplification_factor_phase
                                    .map_or("—".into(), |p| format!("{p:.1}")),
                                format!("{:.0}", c.phase_change_deg),
                            ]
                        })
                        .collect();
                    if rows.is_empty() {
                        d.para("No critical speed found.", 9.0, false);
                    } else {
                        d.table(
                            &[
                                "critical (rpm)",
                                "order",
                                "AF half-power",
                                "AF phase",
                                "lag change (°)",
                            ],
                            &rows,
                            &[0.22, 0.12, 0.22, 0.2, 0.24],
                        );
                    }
                    for s in &res.subsynchronous {
                        d.para(
                            &format!(
                                "Subsynchronous {:.3}× from {:.0} to {:.0} rpm.",
                                s.order, s.from_rpm, s.to_rpm
                            ),
                            9.0,
                            false,
                        );
                    }
                }
            }
        }
    }
    // Sign-off.
    d.room(150.0);
    d.heading("Sign-off");
    d.para(
        "The results above are advisory; decisions on running speeds belong to the applicable \
         standard, local codes and a competent, licensed engineer.",
        8.5,
        false,
    );
    for (role, name) in [
        ("Tested by", &info.operator),
        ("Reviewed by", &info.reviewer),
    ] {
        d.room(50.0);
        d.y -= 34.0;
        let y = d.y;
        d.text_at(MARGIN, y, 9.0, true, role);
        d.text_at(MARGIN + 80.0, y, 9.0, false, name);
        d.page
            .set_stroke_rgb(0.2, 0.2, 0.2)
            .set_line_width(0.6)
            .move_to(MARGIN + 230.0, y - 2.0)
            .line_to(MARGIN + 400.0, y - 2.0)
            .move_to(MARGIN + 420.0, y - 2.0)
            .line_to(W - MARGIN, y - 2.0)
            .stroke();
        d.text_at(MARGIN + 230.0, y - 11.0, 7.0, false, "signature");
        d.text_at(MARGIN + 420.0, y - 11.0, 7.0, false, "date");
    }
    d.finish(&format!(
        "{title} — impact test report, written {}",
        r.written_utc
    ))
}

/// Writes the PDF report to `path`, atomically.
pub fn write_pdf(path: &Path, r: &ReportInput) -> Result<(), InputError> {
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        std::fs::create_dir_all(dir)
            .map_err(|e| InputError::new(dir, format!("cannot create folder: {e}")))?;
    }
    crate::atomic::write_bytes(path, &pdf(r))
        .map_err(|e| InputError::new(path, format!("cannot write: {e}")))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn text_outside_latin1_is_spelled_out() {
        assert_eq!(encode("ζ = 0.4 %"), b"zeta = 0.4 %".to_vec());
        assert_eq!(
            encode("m/s² ±1 °"),
            vec![b'm', b'/', b's', 0xB2, b' ', 0xB1, b'1', b' ', 0xB0]
        );
        assert_eq!(encode("Δf ≥ 1"), b"df >= 1".to_vec());
    }

    #[test]
    fn long_text_wraps_within_the_width() {
        let text = "word ".repeat(200);
        let lines = wrap(&text, 10.0, false, 300.0);
        assert!(lines.len() > 5);
        assert!(lines.iter().all(|l| width(l, 10.0, false) <= 300.0));
    }
}
