//! The report's section on run-ups and coast-downs: for each run, its speed range and
//! direction, the tracked 1× (and other orders) amplitude and lag against speed, the critical
//! speeds with their amplification factors, subsynchronous components, the rotor model beside
//! them, and the run's warnings — under the cautions of a machine that turns.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use super::svg::{Frame, Series, escape, plot};
use crate::coast::{RunOptions, RunResult, analyse_run};
use crate::model::study::Study;
use crate::pipeline::run_model::RunModel;
use crate::session::SavedRun;

/// A run recording to report, with how to read it.
#[derive(Debug, Clone, PartialEq)]
pub struct RunSource {
    /// The recording.
    pub path: PathBuf,
    /// How to read it.
    pub options: RunOptions,
    /// When it was recorded (empty: not known).
    pub recorded: String,
    /// A person's note.
    pub note: String,
}

/// A run as reported: tracked (or why not) and, with a service rotor, compared with the model.
#[derive(Debug, Clone)]
pub struct ReportRun {
    /// Its source.
    pub source: RunSource,
    /// The tracking.
    pub result: Result<RunResult, String>,
    /// The model's view (`None`: no service rotor).
    pub model: Option<Result<RunModel, String>>,
}

/// The runs a session holds, read with their kept settings.
pub fn session_runs(dir: &Path, runs: &[SavedRun]) -> Vec<RunSource> {
    runs.iter()
        .map(|r| RunSource {
            path: dir.join(&r.file),
            options: RunOptions {
                tach_channel: r.tach_channel,
                channel: r.channel,
                sensitivity_mv_per_unit: r.sensitivity_mv_per_unit,
                full_scale_volts: r.full_scale_volts,
                pulses_per_rev: r.pulses_per_rev,
                ..RunOptions::default()
            },
            recorded: r.recorded.clone(),
            note: r.note.clone(),
        })
        .collect()
}

/// Tracks each run and compares it with the study's service rotor, if any. A run that cannot
/// be read is reported as such rather than failing the report.
pub fn track_runs(sources: &[RunSource], study: Option<&Study>) -> Vec<ReportRun> {
    sources
        .iter()
        .map(|src| {
            let result = analyse_run(&src.path, &src.options).map_err(|e| e.to_string());
            let model = match (&result, study) {
                (Ok(run), Some(st)) => crate::pipeline::run_model::compare_study(st, run, None),
                _ => None,
            };
            ReportRun {
                source: src.clone(),
                result,
                model,
            }
        })
        .collect()
}

const COLOURS: [&str; 4] = ["#1f5fa8", "#8a1f4f", "#2a8a3a", "#a06a00"];

/// Writes the section (nothing when there are no runs).
pub fn section(s: &mut String, runs: &[ReportRun]) {
    if runs.is_empty() {
        return;
    }
    s.push_str("<h2>Run-up and coast-down</h2>");
    let _ = write!(
        s,
        "<div class=\"caution\">{} Critical speeds and amplification factors from a run are \
         advisory: separation margins and acceptance follow the machine's specification, the \
         applicable standard and licensed engineering judgement.</div>",
        escape(crate::cautions::RUN)
    );
    for r in runs {
        run(s, r);
    }
}

fn run(s: &mut String, r: &ReportRun) {
    let name = r
        .source
        .path
        .file_name()
        .map_or_else(|| "run".to_string(), |n| n.to_string_lossy().into_owned());
    let _ = write!(s, "<h3>{}</h3>", escape(&name));
    let mut meta = Vec::new();
    if !r.source.recorded.is_empty() {
        meta.push(format!("recorded {}", r.source.recorded));
    }
    if !r.source.note.is_empty() {
        meta.push(r.source.note.clone());
    }
    meta.push(format!(
        "tach on channel {}, {} pulse{} per revolution; vibration on channel {}{}",
        r.source.options.tach_channel,
        r.source.options.pulses_per_rev,
        if r.source.options.pulses_per_rev == 1 {
            ""
        } else {
            "s"
        },
        r.source.options.channel,
        r.source
            .options
            .sensitivity_mv_per_unit
            .map_or(" (full-scale units)".to_string(), |v| format!(
                ", {v} mV/(m/s²)"
            ))
    ));
    let _ = write!(s, "<p>{}.</p>", escape(&meta.join("; ")));
    let run = match &r.result {
        Ok(run) => run,
        Err(e) => {
            let _ = write!(
                s,
                "<p class=\"bad\">This run could not be tracked: {}</p>",
                escape(e)
            );
            return;
        }
    };
    let _ = write!(
        s,
        "<p>{} revolutions, {:.0} to {:.0} rpm, {}.</p>",
        run.revolutions,
        run.speed_range_rpm[0],
        run.speed_range_rpm[1],
        run.direction.word()
    );
    let model = r.model.as_ref().and_then(|m| m.as_ref().ok());
    let fit = model.and_then(|m| m.response.as_ref());
    let mut marks: Vec<(f64, String)> = run
        .critical_speeds
        .iter()
        .map(|c| (c.speed_rpm, format!("{:.0}", c.speed_rpm)))
        .collect();
    if let Some(m) = model {
        marks.extend(
            m.critical_speeds_rpm
                .iter()
                .map(|&p| (p, format!("model {p:.0}"))),
        );
    }
    let frame = |y: String| Frame {
        width: 940.0,
        height: 260.0,
        x_label: "speed (rpm)".into(),
        y_label: y,
        x_range: Some(run.speed_range_rpm),
        x_marks: marks.clone(),
        ..Frame::default()
    };
    let mut amp = Vec::new();
    let mut lag = Vec::new();
    for (k, (_order, pts)) in run.tracks.iter().enumerate() {
        let b = crate::coast::findings::bode(pts);
        let colour = COLOURS[k % COLOURS.len()];
        amp.push(Series::line(
            b.speeds
                .iter()
                .zip(&b.vectors)
                .map(|(s, v)| [*s, v.norm()])
                .collect(),
            colour,
            1.3,
        ));
        for seg in crate::coast::findings::confident_lags(pts) {
            lag.push(Series::line(seg, colour, 1.3));
        }
    }
    if let Some(f) = fit {
        let mut line = Series::line(
            f.speeds_rpm
                .iter()
                .zip(&f.predicted_amplitude)
                .map(|(s, a)| [*s, *a])
                .collect(),
            "#b35900",
            1.5,
        );
        line.dashed = true;
        amp.push(line);
    }
    let orders: Vec<String> = run
        .tracks
        .iter()
        .enumerate()
        .map(|(k, (o, _))| format!("{o}× {}", ["blue", "wine", "green", "ochre"][k % 4]))
        .collect();
    let _ = write!(
        s,
        "<p>Amplitude (zero to peak, {}) and lag behind the tach edge against speed, averaged \
         over revolutions within 0.3 % of speed: {}{}. Marks: critical speeds found{}.</p>",
        escape(run.amplitude_unit),
        escape(&orders.join(", ")),
        if fit.is_some() {
            "; dashed orange: the rotor model's unbalance response fitted to the 1×"
        } else {
            ""
        },
        if model.is_some() {
            " and the model's"
        } else {
            ""
        }
    );
    s.push_str(&plot(
        &frame(format!("amplitude ({})", run.amplitude_unit)),
        &amp,
    ));
    s.push_str(&plot(&frame("lag (degrees)".into()), &lag));
    if run.critical_speeds.is_empty() {
        s.push_str("<p>No critical speed was found in the run.</p>");
    } else {
        s.push_str(
            "<table><tr><th>critical speed (rpm)</th><th>order</th><th>AF, half-power</th>\
             <th>AF, phase slope</th><th>lag change (°)</th><th>sweep Ω̇/(ζω)²</th>\
             <th>model (rpm)</th><th>model − measured</th></tr>",
        );
        for c in &run.critical_speeds {
            let m = model
                .and_then(|m| {
                    m.comparison
                        .iter()
                        .find(|q| q.measured_rpm == c.speed_rpm && c.order == 1)
                })
                .map_or(("—".to_string(), "—".to_string()), |q| {
                    (
                        format!("{:.0}", q.predicted_rpm),
                        format!("{:+.1} %", q.difference_pct),
                    )
                });
            let _ = write!(
                s,
                "<tr><td>{:.0}</td><td>{}×</td><td>{:.1}</td><td>{}</td><td>{:.0}</td>\
                 <td{}>{:.3}</td><td>{}</td><td>{}</td></tr>",
                c.speed_rpm,
                c.order,
                c.amplification_factor,
                c.amplification_factor_phase
                    .map_or("—".to_string(), |p| format!("{p:.1}")),
                c.phase_change_deg,
                if c.sweep_parameter > 0.1 {
                    " class=\"bad\""
                } else {
                    ""
                },
                c.sweep_parameter,
                m.0,
                m.1
            );
        }
        s.push_str("</table>");
    }
    for sub in &run.subsynchronous {
        let _ = write!(
            s,
            "<p class=\"bad\">Subsynchronous component at {:.3}× running speed from {:.0} to \
             {:.0} rpm, up to {:.3e} m/s²: a whirl or rub to be explained before the machine runs \
             there.</p>",
            sub.order, sub.from_rpm, sub.to_rpm, sub.peak_amplitude
        );
    }
    match &r.model {
        Some(Ok(m)) => {
            if let Some(f) = &m.response {
                let _ = write!(
                    s,
                    "<p>Rotor model: its unbalance response at {:.3} m ({}) fitted to the \
                     measured 1× by one complex factor ({:.3}×, lag {:+.0}°) leaves a {:.1} % \
                     residual{}.</p>",
                    f.position_m,
                    escape(&f.unbalance),
                    f.scale,
                    f.angle_deg,
                    f.residual_pct,
                    if f.residual_pct > 30.0 {
                        ": the measured curve does not have the model's shape — check the \
                         bearings, the supports and the sensor's place"
                    } else {
                        ""
                    }
                );
            }
            if m.critical_speeds_rpm.is_empty() {
                s.push_str(
                    "<p>The rotor model predicts no forward 1× critical speed in the run's \
                     range.</p>",
                );
            }
        }
        Some(Err(e)) => {
            let _ = write!(
                s,
                "<p class=\"bad\">The rotor model could not be compared: {}</p>",
                escape(e)
            );
        }
        None => {}
    }
    if !run.warnings.is_empty() {
        s.push_str("<ul class=\"note\">");
        for w in &run.warnings {
            let _ = write!(s, "<li>{}</li>", escape(w));
        }
        s.push_str("</ul>");
    }
}
