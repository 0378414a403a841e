//! The written test report: one self-contained HTML file (inline SVG plots, no script, no
//! external files) that reads on screen and prints. It states the setup, every hit's verdict, the
//! FRFs and coherence, the modes with their shapes, the model correlation and the running-speed
//! margins, each with the cautions that go with it.

use std::fmt::Write as _;
use std::path::Path;

use super::svg::{Frame, Series, escape, plot};
use crate::acquire::InputError;
use crate::acquire::wavset::PositionSource;
use crate::analysis::Analysis;
use crate::cautions::{CAUTIONS, MAP_NOTE, MARGIN_NOTE};
use crate::modal::{DampingSource, ModalResult};
use crate::model::margin::Side;
use crate::model::run::interpolate;
use crate::model::study::{ResonanceSource, Study, StudyResult};
use crate::reduce::min_max;
use crate::setup::Layout;

/// Everything a report is written from.
#[derive(Debug, Clone, Copy)]
pub struct ReportInput<'a> {
    /// Part name or tag (empty: the folder's name is used).
    pub part: &'a str,
    /// Free notes on the part and the test.
    pub notes: &'a str,
    /// The session or WAV set analysed.
    pub source: &'a Path,
    /// The signal chain's result.
    pub analysis: &'a Analysis,
    /// The modal fit.
    pub modes: &'a ModalResult,
    /// The shaft model study and its result, when there is one.
    pub study: Option<(&'a Study, &'a StudyResult)>,
    /// When the report was written, as text (UTC).
    pub written_utc: &'a str,
    /// The rotor at speed, when the study gives a service rotor.
    pub rotor: Option<&'a crate::rotor::run::AtSpeed>,
    /// Run-ups and coast-downs, tracked.
    pub runs: &'a [super::runs::ReportRun],
    /// Who tested, where and with what (for the record and the sign-off).
    pub info: Option<&'a crate::session::ReportInfo>,
}

/// The rotor at speed for a report: solved when the study holds a service rotor (bearings with
/// eight coefficients or film geometry); `None` otherwise (plain springs are the margins
/// section's business). An error is reported in the section rather than failing the report.
pub fn rotor_for_report(study: &Study) -> Option<Result<crate::rotor::run::AtSpeed, String>> {
    study.rotor.as_ref()?;
    let file = match crate::rotor::file::from_study(study) {
        Ok(Some(f)) => f,
        Ok(None) => return None,
        Err(e) => return Some(Err(e)),
    };
    let o = crate::rotor::run::AtSpeedOptions::for_range(file.operating_range_rpm);
    Some(crate::rotor::run::at_speed(&file, &o))
}

const STYLE: &str = "body{font:14px/1.45 sans-serif;color:#222;max-width:980px;margin:24px auto;\
padding:0 16px}h1{font-size:22px;margin-bottom:2px}h2{font-size:17px;border-bottom:1px solid #bbb;\
margin-top:28px}table{border-collapse:collapse;margin:8px 0}td,th{border:1px solid #ccc;\
padding:3px 7px;text-align:right}th{background:#f0f0f0}td.l,th.l{text-align:left}\
.caution{border:2px solid #b35900;background:#fff6ec;padding:8px 12px;margin:12px 0}\
.bad{color:#a00000;font-weight:bold}.ok{color:#1a6b1a}.note{color:#6b4a00}\
svg.plot{font:11px sans-serif;margin:4px 8px 4px 0}.shapes{display:flex;flex-wrap:wrap}\
.meta td{text-align:left}figure{margin:0 8px 8px 0}figcaption{font-weight:bold}@media print{.caution{break-inside:avoid}svg.plot{break-inside:avoid}}";

/// The report's title: the part's name, else the folder's.
pub fn title(r: &ReportInput) -> String {
    if r.part.trim().is_empty() {
        r.source
            .file_name()
            .map_or_else(|| "impact test".to_string(), |n| n.to_string_lossy().into())
    } else {
        r.part.to_string()
    }
}

/// The report as an HTML document.
pub fn html(r: &ReportInput) -> String {
    let a = r.analysis;
    let title = title(r);
    let mut s = String::new();
    let _ = write!(
        s,
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>{t} — impact test \
         report</title><style>{STYLE}</style></head><body><h1>{t} — impact test report</h1>",
        t = escape(&title)
    );
    let _ = write!(
        s,
        "<p>Written {} by tapgrid {} from <code>{}</code>.</p>",
        escape(r.written_utc),
        env!("CARGO_PKG_VERSION"),
        escape(&r.source.display().to_string())
    );
    if !r.notes.trim().is_empty() {
        let _ = write!(s, "<p>{}</p>", escape(r.notes));
    }
    record_section(&mut s, r);
    s.push_str("<div class=\"caution\"><b>Read first.</b><ul>");
    for c in CAUTIONS {
        let _ = write!(s, "<li>{}</li>", escape(c));
    }
    s.push_str("</ul></div>");
    setup_section(&mut s, a);
    hits_section(&mut s, a);
    frf_section(&mut s, a, r.modes);
    modes_section(&mut s, r);
    if let Some((study, result)) = r.study {
        model_section(&mut s, r.modes, study, result);
        margin_section(&mut s, study, result);
        if let Some(at) = r.rotor {
            rotor_section(&mut s, at);
        }
    } else {
        s.push_str(
            "<h2>Shaft model and running-speed margins</h2><p>No shaft model was given, so \
             there is no correlation and no margin check in this report.</p>",
        );
    }
    super::runs::section(&mut s, r.runs);
    sign_off(&mut s, r);
    s.push_str("</body></html>\n");
    s
}

/// Writes the report to `path`, atomically.
pub fn write_html(path: &Path, r: &ReportInput) -> Result<(), InputError> {
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        std::fs::create_dir_all(dir)
            .map_err(|e| InputError::new(dir, format!("cannot create folder: {e}")))?;
    }
    crate::atomic::write_bytes(path, html(r).as_bytes())
        .map_err(|e| InputError::new(path, format!("cannot write: {e}")))
}

pub use crate::clock::{utc_now, utc_text};

/// The test record: who, where, when, with what.
fn record_section(s: &mut String, r: &ReportInput) {
    let empty = crate::session::ReportInfo::default();
    let i = r.info.unwrap_or(&empty);
    s.push_str("<h2>Test record</h2><table class=\"meta\">");
    let or_blank = |v: &str| {
        if v.trim().is_empty() {
            "(not entered)".to_string()
        } else {
            v.to_string()
        }
    };
    row(s, "tested by", &or_blank(&i.operator));
    row(s, "site", &or_blank(&i.site));
    row(
        s,
        "test date",
        &if i.test_date.trim().is_empty() {
            format!("(not entered; report written {})", r.written_utc)
        } else {
            i.test_date.clone()
        },
    );
    row(s, "part held by", &or_blank(&i.support));
    row(s, "signal conditioning", &or_blank(&i.conditioning));
    s.push_str("</table>");
    if i.instruments.is_empty() {
        s.push_str("<p class=\"note\">No instruments were entered (hammer, tip, accelerometers with serial numbers and calibration dates): enter them with <code>tapgrid report-details</code> or in the window's Test setup.</p>");
    } else {
        s.push_str(
            "<table><tr><th class=\"l\">instrument</th><th class=\"l\">make and model</th>\
             <th class=\"l\">serial</th><th class=\"l\">calibrated</th>\
             <th class=\"l\">sensitivity</th></tr>",
        );
        for x in &i.instruments {
            let _ = write!(
                s,
                "<tr><td class=\"l\">{}</td><td class=\"l\">{}</td><td class=\"l\">{}</td>\
                 <td class=\"l\">{}</td><td class=\"l\">{}</td></tr>",
                escape(&x.role),
                escape(&x.model),
                escape(&x.serial),
                escape(&x.calibrated),
                escape(&x.sensitivity)
            );
        }
        s.push_str("</table>");
    }
}

/// Signature lines for the person who tested and the one who reviews.
fn sign_off(s: &mut String, r: &ReportInput) {
    let empty = crate::session::ReportInfo::default();
    let i = r.info.unwrap_or(&empty);
    s.push_str(
        "<h2>Sign-off</h2><p>The results above are advisory; decisions on running speeds belong \
         to the applicable standard, local codes and a competent, licensed engineer.</p>\
         <table class=\"meta\" style=\"width:100%\"><tr><th class=\"l\"></th>\
         <th class=\"l\">name</th><th class=\"l\" style=\"width:40%\">signature</th>\
         <th class=\"l\">date</th></tr>",
    );
    for (role, name) in [("tested by", &i.operator), ("reviewed by", &i.reviewer)] {
        let _ = write!(
            s,
            "<tr><th class=\"l\">{role}</th><td class=\"l\">{}</td>\
             <td class=\"l\" style=\"height:42px\"></td><td class=\"l\"></td></tr>",
            escape(name)
        );
    }
    s.push_str("</table>");
}

fn row(s: &mut String, name: &str, value: &str) {
    let _ = write!(
        s,
        "<tr><th class=\"l\">{}</th><td class=\"l\">{}</td></tr>",
        escape(name),
        escape(value)
    );
}

fn setup_section(s: &mut String, a: &Analysis) {
    let st = &a.setup;
    let first = a.stations.first().map(|x| &x.result);
    let [lo, hi] = st.band(a.sample_rate_hz);
    s.push_str("<h2>Test setup</h2><table class=\"meta\">");
    row(
        s,
        "Layout",
        match st.layout {
            Layout::Hammer => {
                "roving hammer: channel A force at the station hit, channel B response at the \
                 reference; FRF = accelerance (m/s²)/N"
            }
            Layout::Sensor => {
                "roving accelerometer: channel A fixed reference, channel B roving response; FRF = \
                 transmissibility to the reference"
            }
        },
    );
    if let Some(r) = st.reference_station {
        row(s, "Reference station", &r.to_string());
    }
    row(
        s,
        "Channels",
        &format!(
            "A = input {} at {:.4} mV/unit, B = input {} at {:.4} mV/unit, full scale ±{} V",
            st.channel_a.index,
            st.channel_a.sensitivity.volts_per_unit() * 1000.0,
            st.channel_b.index,
            st.channel_b.sensitivity.volts_per_unit() * 1000.0,
            st.full_scale_volts
        ),
    );
    row(s, "Sample rate", &format!("{} Hz", a.sample_rate_hz));
    if let Some(f) = first {
        row(
            s,
            "Record",
            &format!(
                "{} samples ({:.3} s), line spacing {:.4} Hz, pretrigger {:.0} %",
                f.record_samples,
                f.record_samples as f64 / a.sample_rate_hz.max(1) as f64,
                f.df_hz,
                100.0 * st.trigger.pretrigger_fraction
            ),
        );
        row(
            s,
            "Exponential window",
            &if f.exp_tau_s.is_finite() {
                format!(
                    "falls to {:.1} % at the record end, τ = {:.4} s; damping is corrected for it \
                     (poles shifted by −1/τ)",
                    100.0 * st.windows.exponential_end,
                    f.exp_tau_s
                )
            } else {
                "none".into()
            },
        );
        row(
            s,
            "AC coupling undone",
            &f.ac_corner_hz
                .map_or("no".into(), |c| format!("first order, corner {c:.2} Hz")),
        );
    }
    row(s, "Analysis band", &format!("{lo} – {hi} Hz"));
    row(s, "Estimator", &format!("{:?}", st.estimator));
    s.push_str("</table>");
    for w in a.warnings() {
        let _ = write!(s, "<p class=\"note\">Note: {}</p>", escape(&w));
    }
}

fn hits_section(s: &mut String, a: &Analysis) {
    let total: usize = a.stations.iter().map(|x| x.result.hits.len()).sum();
    let accepted: usize = a
        .stations
        .iter()
        .map(|x| x.result.hits.iter().filter(|h| h.accepted).count())
        .sum();
    let _ = write!(
        s,
        "<h2>Hits</h2><p>{accepted} of {total} hits entered the averages. A rejected hit is left out \
         of its station's FRF; a person's override wins over the automatic verdict.</p>\
         <table><tr><th>station</th><th>position (m)</th><th>accepted / hits</th>\
         <th>band with γ² ≥ 0.9</th><th class=\"l\">verdicts</th></tr>"
    );
    for st in &a.stations {
        let acc = st.result.hits.iter().filter(|h| h.accepted).count();
        let good = st.result.frf.as_ref().map(super::good_coherence_share);
        let mut notes: Vec<String> = Vec::new();
        for h in &st.result.hits {
            if !h.reasons.is_empty() {
                let why: Vec<&str> = h.reasons.iter().map(|r| r.sentence()).collect();
                notes.push(format!(
                    "hit {}: {}{}",
                    h.index + 1,
                    why.join(" "),
                    if h.override_accept == Some(true) {
                        " Kept by a person's override."
                    } else {
                        ""
                    }
                ));
            } else if h.override_accept == Some(false) {
                notes.push(format!(
                    "hit {}: rejected by a person's override.",
                    h.index + 1
                ));
            }
        }
        let pos = format!(
            "{:.4}{}",
            st.position_m,
            if st.position_source == PositionSource::Spacing {
                " (assumed)"
            } else {
                ""
            }
        );
        let _ = write!(
            s,
            "<tr><td>{}</td><td>{}</td><td{}>{acc} / {}</td><td>{}</td><td class=\"l\">{}</td></tr>",
            st.station,
            pos,
            if acc == 0 { " class=\"bad\"" } else { "" },
            st.result.hits.len(),
            good.map_or("—".into(), |g| format!("{:.0} %", 100.0 * g)),
            escape(&notes.join(" "))
        );
    }
    s.push_str("</table>");
}

fn frf_section(s: &mut String, a: &Analysis, m: &ModalResult) {
    let frfs: Vec<_> = a
        .stations
        .iter()
        .filter_map(|st| st.result.frf.as_ref().map(|f| (st.station, f)))
        .collect();
    if frfs.is_empty() {
        s.push_str("<h2>FRFs</h2><p class=\"bad\">No station has an accepted hit.</p>");
        return;
    }
    let reference = a.setup.reference_station;
    let (unit, what) = match a.setup.layout {
        Layout::Hammer => ("dB re 1 (m/s²)/N", "accelerance"),
        Layout::Sensor => ("dB re 1", "transmissibility"),
    };
    let marks: Vec<(f64, String)> = m
        .modes
        .iter()
        .enumerate()
        .map(|(i, md)| (md.frequency_hz, format!("{}", i + 1)))
        .collect();
    let columns = 700;
    let mut mag = Vec::new();
    let mut coh = Vec::new();
    for (station, f) in &frfs {
        let highlight = Some(*station) == reference;
        let (colour, width) = if highlight {
            ("#1f5fa8", 1.6)
        } else {
            ("#9a9a9a", 0.7)
        };
        let db: Vec<f64> =
            f.h.iter()
                .map(|h| 20.0 * h.norm().max(1e-300).log10())
                .collect();
        let range = [
            f.freq_hz.first().copied().unwrap_or(0.0),
            f.freq_hz.last().copied().unwrap_or(1.0),
        ];
        let (mut m_pts, mut c_pts) = (Vec::new(), Vec::new());
        min_max(&f.freq_hz, &db, range, columns, &mut m_pts);
        min_max(&f.freq_hz, &f.coherence, range, columns, &mut c_pts);
        mag.push(Series::line(m_pts, colour, width));
        coh.push(Series::line(c_pts, colour, width));
    }
    // The highlighted station last, on top.
    let order = |v: &mut Vec<Series>| v.sort_by_key(|x| x.colour == "#1f5fa8");
    order(&mut mag);
    order(&mut coh);
    // The magnitude axis spans what the data holds above a floor 120 dB under the top.
    let top = mag
        .iter()
        .flat_map(|x| x.points.iter().map(|p| p[1]))
        .fold(f64::NEG_INFINITY, f64::max);
    let bottom = mag
        .iter()
        .flat_map(|x| x.points.iter().map(|p| p[1]))
        .fold(f64::INFINITY, f64::min)
        .max(top - 120.0);
    let _ = write!(
        s,
        "<h2>FRFs</h2><p>{} of all {} stations{}; dashed lines mark the fitted modes. Coherence \
         dips at antiresonances are expected; broad low coherence is not.</p>",
        what,
        frfs.len(),
        match reference {
            Some(r) => format!(", reference station {r} in blue"),
            None => String::new(),
        }
    );
    let frame = |y_label: &str, y_range: Option<[f64; 2]>, height: f64| Frame {
        width: 940.0,
        height,
        x_label: "frequency (Hz)".into(),
        y_label: y_label.into(),
        x_range: None,
        y_range,
        x_marks: marks.clone(),
        ..Frame::default()
    };
    s.push_str(&plot(
        &frame(unit, Some([bottom - 3.0, top + 3.0]), 320.0),
        &mag,
    ));
    s.push_str(&plot(
        &frame("coherence γ²", Some([0.0, 1.02]), 200.0),
        &coh,
    ));
}

fn damping_text(z: Option<f64>) -> String {
    z.map_or("—".into(), |z| format!("{:.3}", 100.0 * z))
}

/// A paired model mode: its displacement at the stations (for the scale) and along its nodes.
struct ModelShape {
    at_stations: Vec<f64>,
    along: Vec<[f64; 2]>,
}

fn modes_section(s: &mut String, r: &ReportInput) {
    let m = r.modes;
    s.push_str("<h2>Modes</h2>");
    if m.modes.is_empty() {
        s.push_str("<p>No mode was extracted.</p>");
    } else {
        s.push_str(
            "<p>Frequencies and damping ratios with the exponential window's share removed. Shapes \
             are real (the fit's principal axis), signed so the reference station is positive, \
             largest magnitude 1.</p><table><tr><th>mode</th><th>frequency (Hz)</th>\
             <th>damping ζ (%)</th><th class=\"l\">damping from</th><th>half-power ζ (%)</th>\
             <th>circle-fit ζ (%)</th><th>MPC</th><th>MPD (°)</th><th class=\"l\">notes</th></tr>",
        );
        for (i, md) in m.modes.iter().enumerate() {
            let source = match md.damping_source {
                Some(DampingSource::Pole) => "fitted pole",
                Some(DampingSource::HalfPower) => "half-power width",
                Some(DampingSource::CircleFit) => "circle fit",
                Some(DampingSource::ResponseAutospectrum) => "response auto-spectra",
                None => "—",
            };
            let _ = write!(
                s,
                "<tr><td>{}</td><td>{:.2}</td><td>{}</td><td class=\"l\">{source}</td><td>{}</td>\
                 <td>{}</td><td>{:.3}</td><td>{:.1}</td><td class=\"l\">{}</td></tr>",
                i + 1,
                md.frequency_hz,
                damping_text(md.damping_ratio),
                damping_text(md.damping_half_power),
                damping_text(md.damping_circle_fit),
                md.mpc,
                md.mpd_deg,
                escape(&md.notes.join(" "))
            );
        }
        s.push_str("</table>");
    }
    for w in &m.warnings {
        let _ = write!(s, "<p class=\"note\">Note: {}</p>", escape(w));
    }
    if m.modes.is_empty() {
        return;
    }
    // Paired model shapes, scaled to the test shape by least squares, are drawn dashed.
    let pairs: Vec<Option<ModelShape>> = m
        .modes
        .iter()
        .enumerate()
        .map(|(i, _)| {
            let (_, res) = r.study?;
            let c = res.correlation.as_ref()?;
            let p = c.pairs.iter().find(|p| p.test == i)?;
            let model = &res.tested.modes[p.model];
            let at_stations = m
                .positions_m
                .iter()
                .map(|&x| interpolate(&res.tested.nodes_m, &model.displacement, x))
                .collect();
            let along = res
                .tested
                .nodes_m
                .iter()
                .zip(&model.displacement)
                .map(|(&x, &v)| [x, v])
                .collect();
            Some(ModelShape { at_stations, along })
        })
        .collect();
    s.push_str(
        "<p>Mode shapes along the part (dots: stations; dashed: the paired model mode along the \
         whole shaft, scaled to the test at the stations by least squares).</p><div class=\"shapes\">",
    );
    let x_range = r.study.map(|(st, _)| [0.0, st.shaft.length_m()]);
    for (i, (md, model)) in m.modes.iter().zip(&pairs).enumerate() {
        let test: Vec<[f64; 2]> = m
            .positions_m
            .iter()
            .zip(&md.shape)
            .map(|(&x, c)| [x, c.re])
            .collect();
        let mut series = vec![Series {
            markers: true,
            ..Series::line(test, "#1f5fa8", 1.6)
        }];
        if let Some(ModelShape { at_stations, along }) = model {
            let num: f64 = at_stations
                .iter()
                .zip(&md.shape)
                .map(|(a, b)| a * b.re)
                .sum();
            let den: f64 = at_stations.iter().map(|a| a * a).sum();
            let k = if den > 0.0 { num / den } else { 0.0 };
            series.push(Series {
                dashed: true,
                ..Series::line(
                    along.iter().map(|p| [p[0], k * p[1]]).collect(),
                    "#b35900",
                    1.3,
                )
            });
        }
        let frame = Frame {
            width: 310.0,
            height: 190.0,
            x_label: "position (m)".into(),
            y_label: "shape".into(),
            x_range,
            y_range: Some([-1.3, 1.3]),
            zero_line: true,
            ..Frame::default()
        };
        let _ = write!(
            s,
            "<figure><figcaption>Mode {} — {:.1} Hz, ζ {} %</figcaption>{}</figure>",
            i + 1,
            md.frequency_hz,
            damping_text(md.damping_ratio),
            plot(&frame, &series)
        );
    }
    s.push_str("</div>");
}

fn model_section(s: &mut String, m: &ModalResult, study: &Study, r: &StudyResult) {
    let _ = write!(
        s,
        "<h2>Shaft model</h2><p>Timoshenko beam model, {:.4} m long in {} sections, {} bench \
         supports, meshed with {} elements (last mesh halving changed the frequencies by {:.1e}).\
         </p>",
        study.shaft.length_m(),
        study.shaft.sections.len(),
        study.shaft.supports.len(),
        r.tested.elements,
        r.tested.last_change
    );
    match &r.correlation {
        Some(c) => {
            s.push_str(
                "<table><tr><th>test mode</th><th>test (Hz)</th><th>model mode</th>\
                 <th>model (Hz)</th><th>difference (%)</th><th>MAC</th></tr>",
            );
            for p in &c.pairs {
                let _ = write!(
                    s,
                    "<tr><td>{}</td><td>{:.2}</td><td>{}</td><td>{:.2}</td><td>{:+.2}</td>\
                     <td{}>{:.3}</td></tr>",
                    p.test + 1,
                    p.test_hz,
                    p.model + 1,
                    p.model_hz,
                    p.difference_pct,
                    if p.mac < 0.9 { " class=\"bad\"" } else { "" },
                    p.mac
                );
            }
            s.push_str("</table>");
            for &i in &c.unpaired_test {
                let _ = write!(
                    s,
                    "<p class=\"note\">Test mode {} ({:.2} Hz) pairs with no model mode (MAC below \
                     {}).</p>",
                    i + 1,
                    m.modes.get(i).map_or(f64::NAN, |x| x.frequency_hz),
                    study.min_mac
                );
            }
        }
        None => s.push_str("<p>No test modes to correlate.</p>"),
    }
    for &j in &r.missed_in_band {
        let _ = write!(
            s,
            "<p class=\"note\">Model mode {} ({:.2} Hz) lies inside the tested band but was not \
             found in the test.</p>",
            j + 1,
            r.tested.modes[j].frequency_hz
        );
    }
    for w in &r.warnings {
        let _ = write!(s, "<p class=\"note\">Note: {}</p>", escape(w));
    }
}

fn margin_section(s: &mut String, study: &Study, r: &StudyResult) {
    s.push_str("<h2>Running-speed margins</h2>");
    let _ = write!(s, "<div class=\"caution\">{}</div>", escape(MARGIN_NOTE));
    if let Some(service) = &r.service {
        let _ = write!(
            s,
            "<p>Critical speeds on the bearings at nominal stiffness ({}): {}.</p>",
            study
                .bearings
                .iter()
                .map(|b| format!("{:.3} m, {:.3e} N/m", b.position_m, b.stiffness_n_per_m))
                .collect::<Vec<_>>()
                .join("; "),
            service
                .modes
                .iter()
                .filter(|m| !m.rigid_body)
                .map(|m| format!("{:.0} rpm", m.frequency_hz * 60.0))
                .collect::<Vec<_>>()
                .join(", ")
        );
        let _ = write!(s, "<p class=\"note\">{}</p>", escape(MAP_NOTE));
    }
    if let Some(map) = &r.map {
        map_plot(s, study, map, &r.service);
    }
    let Some([lo, hi]) = study.running_speed_rpm else {
        s.push_str("<p>No running speed was given, so no margin was checked.</p>");
        return;
    };
    let failing = r.margins.iter().filter(|l| !l.check.ok).count();
    let _ = write!(
        s,
        "<p>Operating range {lo:.0} – {hi:.0} rpm; orders {}. Rule: no margin needed below an \
         amplification factor of {}; otherwise up to {} % below and {} % above the range. {}</p>",
        study
            .orders
            .iter()
            .map(|o| format!("{o}×"))
            .collect::<Vec<_>>()
            .join(", "),
        study.rule.af_threshold,
        study.rule.below_cap_pct,
        study.rule.above_cap_pct,
        if failing == 0 {
            "<span class=\"ok\">Every line meets the rule.</span>".to_string()
        } else {
            format!("<span class=\"bad\">{failing} line(s) do not meet the rule.</span>")
        }
    );
    s.push_str(
        "<table><tr><th class=\"l\">resonance from</th><th>mode</th><th>frequency (Hz)</th>\
         <th>order</th><th>critical speed (rpm)</th><th>AF</th><th class=\"l\">where</th>\
         <th>margin (%)</th><th>rule asks (%)</th><th class=\"l\">verdict</th></tr>",
    );
    for l in r.margins_closest_first() {
        let c = &l.check;
        let _ = write!(
            s,
            "<tr><td class=\"l\">{}</td><td>{}</td><td>{:.2}</td><td>{}×</td><td>{:.0}</td>\
             <td>{}</td><td class=\"l\">{}</td><td>{:.1}</td><td>{:.1}</td><td class=\"l {}\">{}\
             </td></tr>",
            match l.source {
                ResonanceSource::Measured => "measured (bench)",
                ResonanceSource::ModelInService => "model on bearings",
                ResonanceSource::ModelAsTested => "model as tested",
            },
            l.mode,
            c.frequency_hz,
            c.order,
            c.critical_rpm,
            if c.amplification_factor.is_finite() {
                format!("{:.1}", c.amplification_factor)
            } else {
                "unknown".into()
            },
            match c.side {
                Side::Below => "below the range",
                Side::Inside => "inside the range",
                Side::Above => "above the range",
            },
            c.margin_pct,
            c.required_pct,
            if c.ok { "ok" } else { "bad" },
            if c.ok { "clear" } else { "TOO CLOSE" }
        );
    }
    s.push_str("</table>");
}

/// Critical speeds against support stiffness, log–log, with the running-speed bands of each order
/// and the bearing-stiffness band shaded and the nominal stiffness marked.
fn map_plot(
    s: &mut String,
    study: &Study,
    map: &crate::model::study::StiffnessMap,
    service: &Option<crate::model::run::Converged>,
) {
    const COLOURS: [&str; 6] = [
        "#1f5fa8", "#2a8a3a", "#7a3fa0", "#a06a00", "#00808a", "#8a1f4f",
    ];
    let series: Vec<Series> = map
        .frequencies_hz
        .iter()
        .enumerate()
        .map(|(i, f)| {
            Series::line(
                map.stiffness_n_per_m
                    .iter()
                    .zip(f)
                    .filter(|(_, f)| **f > 0.0)
                    .map(|(&k, &f)| [k, 60.0 * f])
                    .collect(),
                COLOURS[i % COLOURS.len()],
                1.5,
            )
        })
        .collect();
    let y_bands: Vec<([f64; 2], String)> = match study.running_speed_rpm {
        Some([lo, hi]) => study
            .orders
            .iter()
            .map(|&o| {
                // A critical at rpm N is excited at order o when N/o lies in the range: shade
                // the criticals o × range.
                (
                    [lo * o as f64, hi * o as f64],
                    format!("{o}× running speed"),
                )
            })
            .collect(),
        None => Vec::new(),
    };
    let x_bands: Vec<([f64; 2], String)> = match (map.bearings, study.bearing_band_n_per_m) {
        (true, Some(b)) => vec![(b, "bearing band".into())],
        _ => Vec::new(),
    };
    let nominal = match (map.bearings, service) {
        (true, Some(_)) => study
            .bearings
            .first()
            .map(|b| vec![(b.stiffness_n_per_m, "nominal".to_string())])
            .unwrap_or_default(),
        _ => Vec::new(),
    };
    let all_rpm = series
        .iter()
        .flat_map(|x| x.points.iter().map(|p| p[1]))
        .chain(y_bands.iter().flat_map(|(b, _)| b.iter().copied()))
        .filter(|v| *v > 0.0);
    let (lo, hi) = all_rpm.fold((f64::INFINITY, 0.0f64), |(a, b), v| (a.min(v), b.max(v)));
    let k = &map.stiffness_n_per_m;
    let frame = Frame {
        width: 940.0,
        height: 360.0,
        x_label: format!(
            "stiffness of each {} (N/m)",
            if map.bearings {
                "bearing"
            } else {
                "bench support"
            }
        ),
        y_label: "critical speed (rpm)".into(),
        x_range: Some([
            k.first().copied().unwrap_or(1.0),
            k.last().copied().unwrap_or(10.0),
        ]),
        y_range: (hi > lo).then(|| [lo / 1.5, hi * 1.5]),
        x_marks: nominal,
        log_x: true,
        log_y: true,
        y_bands,
        x_bands,
        ..Frame::default()
    };
    s.push_str(
        "<p>Critical speeds (60 × natural frequency) of the first modes against the support \
         stiffness; shaded: the critical speeds each order of the running speed would excite.</p>",
    );
    s.push_str(&plot(&frame, &series));
}

/// The rotor at speed: Campbell diagram, log decrement, unbalance response, critical speeds,
/// threshold and response peaks, with the caution.
fn rotor_section(s: &mut String, r: &crate::rotor::run::AtSpeed) {
    use crate::rotor::eigen::Whirl;
    const COLOURS: [&str; 6] = [
        "#1f5fa8", "#2a8a3a", "#7a3fa0", "#a06a00", "#00808a", "#8a1f4f",
    ];
    let c = &r.campbell;
    s.push_str("<h2>Rotor at speed</h2>");
    let _ = write!(
        s,
        "<div class=\"caution\">{}</div>",
        escape(crate::cautions::ROTOR)
    );
    let top = r.speeds_rpm.last().copied().unwrap_or(1.0);
    let _ = write!(
        s,
        "<p>The tested shaft model spinning on the bearings in service, {} to {} rpm in {} \
         steps, {} whirl modes tracked. {}</p>",
        r.speeds_rpm.first().copied().unwrap_or(0.0),
        top,
        r.speeds_rpm.len(),
        c.modes.len(),
        match c.stability_threshold_rpm {
            Some(t) => format!(
                "<span class=\"bad\">A mode goes unstable (log decrement below zero) from {t:.0} \
                 rpm, whirling at {:.1} Hz.</span>",
                c.threshold_frequency_hz.unwrap_or(f64::NAN)
            ),
            None => format!("<span class=\"ok\">No mode goes unstable up to {top:.0} rpm.</span>"),
        }
    );
    let band: Vec<([f64; 2], String)> = r
        .operating_range_rpm
        .map(|b| vec![(b, "running range".to_string())])
        .unwrap_or_default();
    let marks: Vec<(f64, String)> = c
        .stability_threshold_rpm
        .map(|t| vec![(t, "threshold".to_string())])
        .unwrap_or_default();
    let branch = |b: usize, f: &dyn Fn(&crate::rotor::eigen::DampedMode) -> f64| {
        let modes = &c.modes[b];
        let whirl = modes.last().map_or(Whirl::Forward, |m| m.whirl);
        let mut line = Series::line(
            r.speeds_rpm
                .iter()
                .zip(modes)
                .map(|(s, m)| [*s, f(m)])
                .collect(),
            COLOURS[(b / 2) % COLOURS.len()],
            1.5,
        );
        line.dashed = whirl == Whirl::Backward;
        line
    };
    let f_max = c
        .points
        .iter()
        .map(|p| p.frequency_hz)
        .fold(0.0f64, f64::max);
    let mut series: Vec<Series> = (0..c.modes.len())
        .map(|b| branch(b, &|m| m.frequency_hz))
        .collect();
    for k in [1.0, 2.0] {
        let end = (top * k / 60.0).min(f_max * 1.05);
        series.push(Series::line(
            vec![[0.0, 0.0], [end * 60.0 / k, end]],
            "#777777",
            1.0,
        ));
    }
    let mut crit = Series::line(
        c.critical_speeds
            .iter()
            .map(|cs| [cs.speed_rpm, cs.frequency_hz])
            .collect(),
        "#b35900",
        0.0,
    );
    crit.markers = true;
    series.push(crit);
    let frame = |y: &str| Frame {
        width: 940.0,
        height: 320.0,
        x_label: "speed (rpm)".into(),
        y_label: y.into(),
        x_bands: band.clone(),
        x_marks: marks.clone(),
        ..Frame::default()
    };
    s.push_str(
        "<p>Campbell diagram: whirl frequencies against speed (solid forward, dashed backward), \
         the 1× and 2× lines (grey) and the critical speeds (dots).</p>",
    );
    s.push_str(&plot(
        &Frame {
            y_range: Some([0.0, f_max * 1.08]),
            ..frame("whirl frequency (Hz)")
        },
        &series,
    ));
    let decs: Vec<Series> = (0..c.modes.len())
        .map(|b| branch(b, &|m| m.log_dec.clamp(-2.0, 2.0)))
        .collect();
    s.push_str("<p>Logarithmic decrement of each mode against speed; below zero it grows.</p>");
    s.push_str(&plot(
        &Frame {
            zero_line: true,
            ..frame("log decrement")
        },
        &decs,
    ));
    if c.critical_speeds.is_empty() {
        s.push_str("<p>No critical speed (1× or 2×) in the range.</p>");
    } else {
        s.push_str(
            "<table><tr><th>critical speed (rpm)</th><th>order</th><th class=\"l\">whirl</th>\
             <th>mode</th><th>frequency (Hz)</th><th>damping ratio</th><th>log dec</th></tr>",
        );
        for cs in &c.critical_speeds {
            let _ = write!(
                s,
                "<tr><td>{:.0}</td><td>{}×</td><td class=\"l\">{}</td><td>{}</td><td>{:.2}</td>\
                 <td>{:.4}</td><td>{:.3}</td></tr>",
                cs.speed_rpm,
                cs.order,
                cs.whirl.word(),
                cs.mode,
                cs.frequency_hz,
                cs.damping_ratio,
                cs.log_dec
            );
        }
        s.push_str("</table>");
    }
    if r.response.is_empty() {
        s.push_str("<p>No unbalance was given, so there is no response.</p>");
        return;
    }
    let resp: Vec<Series> = r
        .positions_m
        .iter()
        .enumerate()
        .map(|(k, &x)| {
            Series::line(
                r.response
                    .iter()
                    .filter(|q| q.position_m == x)
                    .map(|q| [q.speed_rpm, q.amplitude_m * 1e6])
                    .collect(),
                COLOURS[k % COLOURS.len()],
                1.5,
            )
        })
        .collect();
    let _ = write!(
        s,
        "<p>Response to the unbalance along x (zero to peak; API amplitudes are peak to peak) at \
         {}.</p>",
        r.positions_m
            .iter()
            .enumerate()
            .map(|(k, x)| format!("{x:.3} m ({})", COLOURS[k % COLOURS.len()]))
            .collect::<Vec<_>>()
            .join(", ")
    );
    s.push_str(&plot(&frame("amplitude (µm)"), &resp));
    s.push_str(
        "<table><tr><th>at (m)</th><th>peak (rpm)</th><th>amplitude (µm)</th><th>N1 (rpm)</th>\
         <th>N2 (rpm)</th><th>AF</th><th>margin (%)</th><th>rule asks (%)</th>\
         <th class=\"l\">verdict</th></tr>",
    );
    let opt = |v: Option<f64>, d: usize| v.map_or("—".to_string(), |x| format!("{x:.d$}"));
    for p in &r.peaks {
        let _ = write!(
            s,
            "<tr><td>{:.3}</td><td>{:.0}</td><td>{:.2}</td><td>{}</td><td>{}</td><td>{}</td>\
             <td>{}</td><td>{}</td><td class=\"l {}\">{}</td></tr>",
            p.peak.position_m,
            p.peak.speed_rpm,
            p.peak.amplitude_m * 1e6,
            opt(p.peak.n1_rpm, 0),
            opt(p.peak.n2_rpm, 0),
            opt(p.peak.amplification_factor, 1),
            opt(p.actual_margin_pct, 1),
            opt(p.required_margin_pct, 1),
            match p.clear {
                Some(true) => "ok",
                Some(false) => "bad",
                None => "",
            },
            match p.clear {
                Some(true) => "clear",
                Some(false) => "TOO CLOSE",
                None => "no range given",
            }
        );
    }
    s.push_str("</table>");
}
