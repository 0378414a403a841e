//! Files for people and other tools: `frf.csv` and `result.json`.

pub mod document;
pub mod pdf;
pub mod runs;
pub mod svg;

use std::fmt::Write as _;
use std::path::Path;

use serde::Serialize;

use crate::acquire::InputError;
use crate::acquire::wavset::PositionSource;
use crate::analysis::Analysis;
use crate::atomic;
use crate::estimate::lscf::Stabilization;
use crate::modal::{DampingSource, Method, ModalResult};
use crate::setup::Setup;

/// Header of `frf.csv` (a stable interface).
pub const FRF_CSV_HEADER: &str = "station,frequency_hz,h_re,h_im,coherence";

/// `frf.csv`: one row per station and spectral line inside the band, SI units.
pub fn frf_csv(a: &Analysis) -> String {
    let blocks = frf_csv_blocks(a);
    let mut out = String::with_capacity(blocks.iter().map(String::len).sum::<usize>() + 64);
    for b in blocks {
        out.push_str(&b);
    }
    out
}

/// `frf.csv` as consecutive pieces (the header first), to be written one after the other.
/// Stations are formatted on parallel threads: on a 40-station test the text is ~20 MB, and
/// writing the pieces as they are spares copying them into one string.
pub fn frf_csv_blocks(a: &Analysis) -> Vec<String> {
    let mut blocks = vec![format!("{FRF_CSV_HEADER}\n")];
    let lines = a
        .stations
        .iter()
        .find_map(|s| s.result.frf.as_ref())
        .map_or(LineTexts::default(), |f| LineTexts::of(&f.freq_hz));
    // A row is at most ~90 characters.
    blocks.extend(text_blocks(
        &a.stations,
        |s| 90 * s.result.frf.as_ref().map_or(0, |f| f.freq_hz.len()),
        |out, s| station_rows(out, s, &lines),
    ));
    blocks
}

/// The frequency column's text, formatted once for every station that shares the lines.
#[derive(Default)]
struct LineTexts {
    freq_hz: Vec<f64>,
    text: Vec<String>,
}

impl LineTexts {
    fn of(freq_hz: &[f64]) -> Self {
        let mut fb = zmij::Buffer::new();
        Self {
            freq_hz: freq_hz.to_vec(),
            text: freq_hz.iter().map(|&f| fb.format(f).to_string()).collect(),
        }
    }

    /// The texts of `freq_hz` when they are these lines.
    fn for_lines(&self, freq_hz: &[f64]) -> Option<&[String]> {
        (self.freq_hz == freq_hz).then_some(self.text.as_slice())
    }
}

/// `items` formatted by `fill`, one block of consecutive items per core, in order. `chars` bounds
/// an item's text, so each block is reserved once and never regrows.
fn text_blocks<T: Sync>(
    items: &[T],
    chars: impl Fn(&T) -> usize + Sync,
    fill: impl Fn(&mut String, &T) + Sync,
) -> Vec<String> {
    let groups: Vec<&[T]> = crate::numeric::core_ranges(items.len(), 1)
        .into_iter()
        .map(|(a, b)| &items[a..b])
        .collect();
    crate::numeric::par_map(&groups, |g| {
        let mut out = String::with_capacity(g.iter().map(&chars).sum());
        for it in *g {
            fill(&mut out, it);
        }
        out
    })
}

fn station_rows(out: &mut String, s: &crate::analysis::StationAnalysis, lines: &LineTexts) {
    // zmij/itoa print the shortest text that reads back to the same f64, several times faster
    // than `{}` formatting on the ~10⁶ numbers of a large test.
    let mut fb = zmij::Buffer::new();
    let mut ib = itoa::Buffer::new();
    let station = ib.format(s.station).to_string();
    if let Some(f) = &s.result.frf {
        let shared = lines.for_lines(&f.freq_hz);
        for i in 0..f.freq_hz.len() {
            out.push_str(&station);
            out.push(',');
            match shared {
                Some(t) => out.push_str(&t[i]),
                None => out.push_str(fb.format(f.freq_hz[i])),
            }
            for v in [f.h[i].re, f.h[i].im, f.coherence[i]] {
                out.push(',');
                out.push_str(fb.format(v));
            }
            out.push('\n');
        }
    }
}

#[derive(Serialize)]
struct HitOut {
    station: u32,
    index: usize,
    accepted: bool,
    reasons: Vec<&'static str>,
    explanations: Vec<&'static str>,
    overridden: bool,
    time_s: f64,
    peak_a_fs: f64,
    peak_b_fs: f64,
    pulse_width_s: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    second_impact_s: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    force_drop_db: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    residual_fraction: Option<f64>,
    ringing_removed: bool,
}

#[derive(Serialize)]
struct StationOut {
    station: u32,
    position_m: f64,
    position_source: PositionSource,
    accepted_hits: usize,
    hits: usize,
    ac_corner_hz: Option<f64>,
    /// LSFD fit error Σ|H − H_syn|²/Σ|H|² over the band, when modes were fitted.
    fit_error: Option<f64>,
    /// Where the force spectrum stays within the roll-off limit (hammer layout), Hz; lines above
    /// the upper edge count less in the fit.
    usable_band_hz: Option<[f64; 2]>,
    #[serde(skip_serializing_if = "Option::is_none")]
    first_null_hz: Option<f64>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    notes: Vec<String>,
}

#[derive(Serialize)]
struct SettingsOut<'a> {
    #[serde(flatten)]
    setup: &'a Setup,
    sample_rate_hz: u32,
    record_samples: usize,
    frequency_resolution_hz: f64,
    band_used_hz: [f64; 2],
    exponential_tau_s: Option<f64>,
    frf_quantity: &'static str,
    frf_unit: &'static str,
}

#[derive(Serialize)]
struct ResultOut<'a> {
    tapgrid_version: &'static str,
    hits: Vec<HitOut>,
    stations: Vec<StationOut>,
    modes: Vec<ModeOut>,
    auto_mac: Vec<Vec<f64>>,
    modal_warnings: Vec<String>,
    settings: SettingsOut<'a>,
    warnings: Vec<String>,
}

/// `stabilization.csv`: every pole of every order, header
/// `order,frequency_hz,damping_ratio,status,mpc` (as measured, exponential window included).
pub fn stabilization_csv(st: &Stabilization) -> String {
    let mut out = String::from("order,frequency_hz,damping_ratio,status,mpc\n");
    for p in &st.poles {
        let _ = writeln!(
            out,
            "{},{},{},{},{}",
            p.order,
            p.frequency_hz,
            p.damping_ratio,
            p.status.word(),
            p.mpc
        );
    }
    out
}

/// `synthesized.csv`: the FRF rebuilt from the fitted modes and residuals, in the layout of
/// `frf.csv` without the coherence column: `station,frequency_hz,h_re,h_im`; H to single
/// precision (the shortest text that reads back to the same f32).
pub fn synthesized_csv(m: &ModalResult) -> String {
    synthesized_csv_blocks(m).concat()
}

/// [`synthesized_csv`] as consecutive pieces (the header first), formatted on every core.
fn synthesized_csv_blocks(m: &ModalResult) -> Vec<String> {
    let lines = m.indicators.freq_hz.len();
    let freq = LineTexts::of(&m.indicators.freq_hz);
    let stations: Vec<usize> = (0..m.synthesized.len()).collect();
    let mut blocks = vec!["station,frequency_hz,h_re,h_im\n".to_string()];
    // A row is at most ~75 characters.
    blocks.extend(text_blocks(
        &stations,
        |_| 75 * lines,
        |out, &i| {
            let mut fb = zmij::Buffer::new();
            let st = m.stations[i].to_string();
            for (f, h) in freq.text.iter().zip(&m.synthesized[i]) {
                out.push_str(&st);
                out.push(',');
                out.push_str(f);
                // A model's values to single precision: ~7 digits, far finer than any fit's
                // error, and the table (as large as frf.csv) a third smaller and quicker to write.
                for v in [h.re, h.im] {
                    out.push(',');
                    out.push_str(fb.format(v as f32));
                }
                out.push('\n');
            }
        },
    ));
    blocks
}

/// `indicators.csv`: `frequency_hz,sum_abs_h,mif,sum_response_autospectra`.
pub fn indicators_csv(m: &ModalResult) -> String {
    let i = &m.indicators;
    let mut out = String::with_capacity(100 * i.freq_hz.len() + 64);
    out.push_str("frequency_hz,sum_abs_h,mif,sum_response_autospectra\n");
    let mut fb = zmij::Buffer::new();
    for k in 0..i.freq_hz.len() {
        for (c, v) in [
            i.freq_hz[k],
            i.sum_abs[k],
            i.mif[k],
            i.sum_response_autospectra[k],
        ]
        .into_iter()
        .enumerate()
        {
            if c > 0 {
                out.push(',');
            }
            out.push_str(fb.format(v));
        }
        out.push('\n');
    }
    out
}

#[derive(Serialize)]
struct ShapePoint {
    station: u32,
    position_m: f64,
    re: f64,
    im: f64,
}

#[derive(Serialize)]
struct ModeOut {
    frequency_hz: f64,
    damping_ratio: Option<f64>,
    method: Method,
    mpc: f64,
    mpd_deg: f64,
    damping_source: Option<DampingSource>,
    measured_frequency_hz: f64,
    measured_damping_ratio: Option<f64>,
    stable_orders: usize,
    damping_half_power: Option<f64>,
    damping_circle_fit: Option<f64>,
    notes: Vec<String>,
    shape: Vec<ShapePoint>,
}

fn modes_out(m: &ModalResult) -> Vec<ModeOut> {
    m.modes
        .iter()
        .map(|md| ModeOut {
            frequency_hz: md.frequency_hz,
            damping_ratio: md.damping_ratio,
            method: md.method,
            mpc: md.mpc,
            mpd_deg: md.mpd_deg,
            damping_source: md.damping_source,
            measured_frequency_hz: md.measured_frequency_hz,
            measured_damping_ratio: md.measured_damping_ratio,
            stable_orders: md.stable_orders,
            damping_half_power: md.damping_half_power,
            damping_circle_fit: md.damping_circle_fit,
            notes: md.notes.clone(),
            shape: md
                .shape
                .iter()
                .enumerate()
                .map(|(i, c)| ShapePoint {
                    station: m.stations[i],
                    position_m: m.positions_m[i],
                    re: c.re,
                    im: c.im,
                })
                .collect(),
        })
        .collect()
}

/// A table of the modes for the terminal.
pub fn modes_summary(m: &ModalResult) -> String {
    let mut s = String::new();
    if m.modes.is_empty() {
        let _ = writeln!(s, "no modes extracted");
    } else {
        let _ = writeln!(s, "mode  frequency_hz  damping_%   MPC   method");
        for (i, md) in m.modes.iter().enumerate() {
            let _ = writeln!(
                s,
                "{:>4}  {:>12.3}  {:>9}  {:.3}  {:?}",
                i + 1,
                md.frequency_hz,
                md.damping_ratio
                    .map_or("—".into(), |z| format!("{:.4}", 100.0 * z)),
                md.mpc,
                md.method
            );
        }
    }
    for w in &m.warnings {
        let _ = writeln!(s, "note: {w}");
    }
    s
}

/// `result.json` as a string.
pub fn result_json(a: &Analysis, m: &ModalResult) -> String {
    let first = a.stations.first().map(|s| &s.result);
    let tau = first.map(|r| r.exp_tau_s).filter(|t| t.is_finite());
    let out = ResultOut {
        tapgrid_version: env!("CARGO_PKG_VERSION"),
        hits: a
            .stations
            .iter()
            .flat_map(|s| {
                s.result.hits.iter().map(move |h| HitOut {
                    station: s.station,
                    index: h.index,
                    accepted: h.accepted,
                    reasons: h.reasons.iter().map(|r| r.word()).collect(),
                    explanations: h.reasons.iter().map(|r| r.sentence()).collect(),
                    overridden: h.override_accept.is_some(),
                    time_s: h.time_s,
                    peak_a_fs: h.peak_a_fs,
                    peak_b_fs: h.peak_b_fs,
                    pulse_width_s: h.pulse_width_s,
                    second_impact_s: h.second_impact_s,
                    force_drop_db: h.force_drop_db.filter(|v| v.is_finite()),
                    residual_fraction: h.residual_fraction,
                    ringing_removed: h.ringing_removed,
                })
            })
            .collect(),
        stations: a
            .stations
            .iter()
            .map(|s| StationOut {
                station: s.station,
                position_m: s.position_m,
                position_source: s.position_source,
                accepted_hits: s.result.hits.iter().filter(|h| h.accepted).count(),
                hits: s.result.hits.len(),
                ac_corner_hz: s.result.ac_corner_hz,
                fit_error: m
                    .stations
                    .iter()
                    .position(|&st| st == s.station)
                    .and_then(|i| m.fit_error.get(i).copied()),
                usable_band_hz: s.result.usable_band_hz,
                first_null_hz: s.result.first_null_hz,
                notes: s.result.notes.clone(),
            })
            .collect(),
        modes: modes_out(m),
        auto_mac: m.auto_mac.clone(),
        modal_warnings: m.warnings.clone(),
        settings: SettingsOut {
            setup: &a.setup,
            sample_rate_hz: a.sample_rate_hz,
            record_samples: first.map_or(0, |r| r.record_samples),
            frequency_resolution_hz: first.map_or(0.0, |r| r.df_hz),
            band_used_hz: a.setup.band(a.sample_rate_hz),
            exponential_tau_s: tau,
            frf_quantity: match a.setup.layout {
                crate::setup::Layout::Hammer => "accelerance",
                crate::setup::Layout::Sensor => "transmissibility",
            },
            frf_unit: a.setup.layout.frf_unit(),
        },
        warnings: a.warnings(),
    };
    serde_json::to_string_pretty(&out).unwrap_or_else(|e| format!("{{\"error\":\"{e}\"}}"))
}

/// Writes `frf.csv` and `result.json` into `dir` (created if needed), atomically.
pub fn write_outputs(a: &Analysis, m: &ModalResult, dir: &Path) -> Result<(), InputError> {
    write_frf_csv(a, dir)?;
    write_fit_outputs(a, m, dir)
}

/// Writes `frf.csv` into `dir` (created if needed), atomically. It depends on the FRFs only, so
/// a caller may write it while the modal fit runs.
pub fn write_frf_csv(a: &Analysis, dir: &Path) -> Result<(), InputError> {
    std::fs::create_dir_all(dir)
        .map_err(|e| InputError::new(dir, format!("cannot create output folder: {e}")))?;
    let t = std::time::Instant::now();
    let csv = frf_csv_blocks(a);
    let t1 = t.elapsed();
    write_blocks(&dir.join("frf.csv"), &csv)?;
    if std::env::var_os("TAPGRID_TIMING").is_some() {
        eprintln!(
            "timing: frf.csv text {:.3} s, write {:.3} s",
            t1.as_secs_f64(),
            (t.elapsed() - t1).as_secs_f64()
        );
    }
    Ok(())
}

/// Writes a derived table given as consecutive pieces, atomically, without joining them first.
fn write_blocks(p: &Path, blocks: &[String]) -> Result<(), InputError> {
    atomic::write_derived_with(p, |f| {
        use std::io::Write as _;
        blocks.iter().try_for_each(|b| f.write_all(b.as_bytes()))
    })
    .map_err(|e| InputError::new(p, format!("cannot write: {e}")))
}

/// Writes `result.json` and the fit's tables (stabilization, indicators, synthesized FRFs)
/// into `dir` (created if needed), atomically.
pub fn write_fit_outputs(a: &Analysis, m: &ModalResult, dir: &Path) -> Result<(), InputError> {
    std::fs::create_dir_all(dir)
        .map_err(|e| InputError::new(dir, format!("cannot create output folder: {e}")))?;
    let t = std::time::Instant::now();
    let write = |name: &str, text: String| {
        let p = dir.join(name);
        atomic::write_derived(&p, text.as_bytes())
            .map_err(|e| InputError::new(&p, format!("cannot write: {e}")))
    };
    // The synthesized FRFs are as large as all the rest together: formed and written on a
    // thread of their own.
    std::thread::scope(|scope| {
        let syn = (!m.synthesized.is_empty()).then(|| {
            scope.spawn(|| write_blocks(&dir.join("synthesized.csv"), &synthesized_csv_blocks(m)))
        });
        write("result.json", result_json(a, m))?;
        if let Some(st) = &m.stabilization {
            write("stabilization.csv", stabilization_csv(st))?;
        }
        write("indicators.csv", indicators_csv(m))?;
        match syn.map(|h| h.join()) {
            Some(Ok(r)) => r,
            Some(Err(_)) => Err(InputError::new(
                dir.join("synthesized.csv"),
                "the writer failed",
            )),
            None => Ok(()),
        }
    })?;
    if std::env::var_os("TAPGRID_TIMING").is_some() {
        eprintln!("timing: fit outputs {:.3} s", t.elapsed().as_secs_f64());
    }
    Ok(())
}

/// Share of the band's lines with coherence ≥ 0.9. It says more than the minimum, which always
/// sits in an antiresonance.
pub fn good_coherence_share(f: &crate::signal::StationFrf) -> f64 {
    f.coherence.iter().filter(|&&c| c >= 0.9).count() as f64 / f.coherence.len().max(1) as f64
}

/// A short plain-text summary for the terminal.
pub fn summary(a: &Analysis) -> String {
    let mut s = String::new();
    let [lo, hi] = a.setup.band(a.sample_rate_hz);
    let first = a.stations.first().map(|s| &s.result);
    let _ = writeln!(
        s,
        "layout {:?}, {} stations, {} Hz, record {} samples (Δf = {:.4} Hz), band {lo}–{hi} Hz, estimator {:?}",
        a.setup.layout,
        a.stations.len(),
        a.sample_rate_hz,
        first.map_or(0, |r| r.record_samples),
        first.map_or(0.0, |r| r.df_hz),
        a.setup.estimator
    );
    let _ = writeln!(
        s,
        "station  position_m  accepted/hits  band with γ² ≥ 0.9  problems"
    );
    for st in &a.stations {
        let acc = st.result.hits.iter().filter(|h| h.accepted).count();
        let good = st.result.frf.as_ref().map(good_coherence_share);
        let mut probs: Vec<String> = Vec::new();
        for h in &st.result.hits {
            if !h.reasons.is_empty() {
                let w: Vec<&str> = h.reasons.iter().map(|r| r.word()).collect();
                probs.push(format!(
                    "hit {} {}{}",
                    h.index + 1,
                    w.join("+"),
                    match h.override_accept {
                        Some(true) => " (kept by override)",
                        _ => "",
                    }
                ));
            } else if h.override_accept == Some(false) {
                probs.push(format!("hit {} rejected by override", h.index + 1));
            }
        }
        let _ = writeln!(
            s,
            "{:>7}  {:>10.4}  {:>6}/{:<6}  {:>18}  {}",
            st.station,
            st.position_m,
            acc,
            st.result.hits.len(),
            good.map_or("—".to_string(), |g| format!("{:.1} %", 100.0 * g)),
            probs.join(", ")
        );
    }
    for w in a.warnings() {
        let _ = writeln!(s, "note: {w}");
    }
    s
}
