//! `tapgrid coastdown`: a run-up or coast-down tracked against speed.

use super::*;
use crate::coast::track::{Quantity, unwrapped_lags};
use crate::coast::{RunOptions, analyse_run};

pub(super) fn coastdown(a: CoastdownArgs) -> Result<()> {
    let orders: Vec<u32> = a
        .orders
        .split(',')
        .map(|s| s.trim().parse::<u32>())
        .collect::<Result<_, _>>()
        .ok()
        .filter(|v: &Vec<u32>| !v.is_empty() && v.iter().all(|&o| (1..=20).contains(&o)))
        .ok_or_else(|| anyhow!("--orders {:?}: whole orders 1 to 20, e.g. 1,2", a.orders))?;
    if a.pulses_per_rev == 0 || a.pulses_per_rev > 360 {
        bail!("--pulses-per-rev must be 1 to 360");
    }
    if !(a.full_scale_volts.is_finite() && a.full_scale_volts > 0.0) {
        bail!("--full-scale-volts must be positive");
    }
    if !(a.ac_corner.is_finite() && a.ac_corner >= 0.0) {
        bail!("--ac-corner must be ≥ 0 Hz");
    }
    let quantity = match a.quantity {
        QuantityArg::Acceleration => Quantity::Acceleration,
        QuantityArg::Velocity => Quantity::Velocity,
        QuantityArg::Displacement => Quantity::Displacement,
    };
    let o = RunOptions {
        tach_channel: a.tach_channel,
        channel: a.channel,
        sensitivity_mv_per_unit: a.sensitivity,
        full_scale_volts: a.full_scale_volts,
        pulses_per_rev: a.pulses_per_rev,
        orders,
        quantity,
        ac_corner_hz: a.ac_corner,
    };
    let r = analyse_run(&a.wav, &o)?;
    let model = match &a.model {
        Some(p) => Some(model_comparison(p, &r, a.sensor_position)?),
        None => None,
    };
    std::fs::create_dir_all(&a.out)
        .with_context(|| format!("{}: cannot create the output folder", a.out.display()))?;
    let mut csv = String::from("speed_rpm,order,amplitude,phase_deg\n");
    for (order, pts) in &r.tracks {
        let lags = unwrapped_lags(&pts.iter().map(|p| p.vector).collect::<Vec<_>>());
        for (p, lag) in pts.iter().zip(lags) {
            csv.push_str(&format!(
                "{:.3},{order},{:e},{:.3}\n",
                p.speed_rpm,
                p.vector.norm(),
                lag
            ));
        }
    }
    let tracking = a.out.join("tracking.csv");
    crate::atomic::write_derived(&tracking, csv.as_bytes())
        .with_context(|| format!("{}: cannot write", tracking.display()))?;
    let result = a.out.join("result.json");
    let mut json = serde_json::to_value(&r)?;
    if let (Some(m), Some(obj)) = (&model, json.as_object_mut()) {
        obj.insert("model".into(), serde_json::to_value(m)?);
    }
    crate::atomic::write_derived(&result, serde_json::to_string_pretty(&json)?.as_bytes())
        .with_context(|| format!("{}: cannot write", result.display()))?;

    println!(
        "{}: {} revolutions, {:.0}–{:.0} rpm, {}",
        a.wav.display(),
        r.revolutions,
        r.speed_range_rpm[0],
        r.speed_range_rpm[1],
        r.direction.word()
    );
    for c in &r.critical_speeds {
        println!(
            "critical speed {:.0} rpm ({}×): AF {:.1} (half-power){}, phase change {:.0}°",
            c.speed_rpm,
            c.order,
            c.amplification_factor,
            c.amplification_factor_phase
                .map_or(String::new(), |p| format!(", {p:.1} (phase)")),
            c.phase_change_deg
        );
    }
    for s in &r.subsynchronous {
        println!(
            "subsynchronous {:.3}× from {:.0} to {:.0} rpm, up to {:.3e} m/s² (as recorded)",
            s.order, s.from_rpm, s.to_rpm, s.peak_amplitude
        );
    }
    for w in &r.warnings {
        println!("warning: {w}");
    }
    if let Some(m) = &model {
        for c in &m.comparison {
            println!(
                "model: {:.0} rpm predicted against {:.0} rpm measured ({:+.1} %)",
                c.predicted_rpm, c.measured_rpm, c.difference_pct
            );
        }
        if let Some(f) = &m.response {
            println!(
                "model: unbalance response at {:.3} m fitted to the measured 1×: {:.1} % residual \
                 ({:.3}× the model's unbalance, {:+.0}°)",
                f.position_m, f.residual_pct, f.scale, f.angle_deg
            );
        }
    }
    println!("wrote {} and {}", tracking.display(), result.display());
    println!("{}", crate::cautions::RUN);
    Ok(())
}

fn model_comparison(
    path: &Path,
    r: &crate::coast::RunResult,
    sensor_position_m: Option<f64>,
) -> Result<crate::pipeline::run_model::RunModel> {
    let study = super::model_cmds::read_study(path)?;
    crate::pipeline::run_model::compare_study(&study, r, sensor_position_m)
        .ok_or_else(|| {
            anyhow!(
                "{}: the model has no bearings in service, so it predicts no critical speeds",
                path.display()
            )
        })?
        .map_err(|e| anyhow!("{}: {e}", path.display()))
}

pub(super) fn record_run(a: RecordRunArgs) -> Result<()> {
    use crate::capture::run::{AutoStop, RunRecordOptions, RunRecorder};
    use std::sync::Arc;
    use std::sync::atomic::{AtomicBool, Ordering};
    if a.tach_input == a.vibration_input {
        bail!("--tach-input and --vibration-input must differ");
    }
    if a.pulses_per_rev == 0 || a.pulses_per_rev > 360 {
        bail!("--pulses-per-rev must be 1 to 360");
    }
    if a.stop_below.is_some_and(|v| !(v.is_finite() && v > 0.0))
        || a.seconds.is_some_and(|v| !(v.is_finite() && v > 0.0))
        || !(a.stall.is_finite() && a.stall > 0.0)
    {
        bail!("--stop-below, --seconds and --stall must be positive");
    }
    if a.sensitivity.is_some_and(|v| !(v.is_finite() && v > 0.0))
        || !(a.full_scale_volts.is_finite() && a.full_scale_volts > 0.0)
    {
        bail!("--sensitivity and --full-scale-volts must be positive");
    }
    let session = crate::session::Session::is_session(&a.out).then(|| a.out.clone());
    let out = if let Some(s) = &session {
        let runs = s.join("runs");
        std::fs::create_dir_all(&runs)
            .with_context(|| format!("{}: cannot create the folder", runs.display()))?;
        crate::capture::run::new_run_path(&runs)
    } else if a
        .out
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("wav"))
    {
        if let Some(parent) = a.out.parent().filter(|p| !p.as_os_str().is_empty()) {
            std::fs::create_dir_all(parent)
                .with_context(|| format!("{}: cannot create the folder", parent.display()))?;
        }
        a.out.clone()
    } else {
        std::fs::create_dir_all(&a.out)
            .with_context(|| format!("{}: cannot create the folder", a.out.display()))?;
        crate::capture::run::new_run_path(&a.out)
    };
    let folder = out.parent().unwrap_or(Path::new("."));
    for p in crate::capture::run::recover(folder)? {
        println!(
            "recovered an unfinished run into {} (not added to any session)",
            p.display()
        );
    }
    println!("{}", crate::cautions::RUN);
    let mut source = crate::capture::open_run_source(
        &a.device,
        [a.tach_input, a.vibration_input],
        a.rate,
        a.buffer,
    )?;
    let rec = RunRecorder::create(
        &out,
        source.sample_rate_hz(),
        RunRecordOptions {
            segment_s: 2.0,
            pulses_per_rev: a.pulses_per_rev,
        },
    )?;
    // Enter stops the recording; a closed stdin (a script) does not.
    let stop = Arc::new(AtomicBool::new(false));
    {
        let stop = stop.clone();
        let _ = std::thread::Builder::new()
            .name("tapgrid-enter".into())
            .spawn(move || {
                let mut line = String::new();
                if matches!(std::io::stdin().read_line(&mut line), Ok(n) if n > 0) {
                    stop.store(true, Ordering::Relaxed);
                }
            });
    }
    println!(
        "recording {} at {} Hz: tach on input {}, vibration on input {}; press Enter to stop",
        out.display(),
        source.sample_rate_hz(),
        a.tach_input,
        a.vibration_input
    );
    let mut last_print = std::time::Instant::now();
    let path = crate::capture::run::record(
        source.as_mut(),
        rec,
        AutoStop {
            below_rpm: a.stop_below,
            after_s: a.seconds,
        },
        std::time::Duration::from_secs_f64(a.stall),
        || stop.load(Ordering::Relaxed),
        |p| {
            if last_print.elapsed().as_secs_f64() >= 1.0 {
                last_print = std::time::Instant::now();
                println!(
                    "{:7.1} s  {}  tach {:.2} FS  vibration {:.2} FS{}",
                    p.seconds,
                    p.speed_rpm
                        .map_or("   no speed".to_string(), |s| format!("{s:7.0} rpm")),
                    p.peak_fs[0],
                    p.peak_fs[1],
                    if p.peak_fs.iter().any(|&v| v >= 0.99) {
                        "  OVERLOAD"
                    } else {
                        ""
                    }
                );
            }
        },
    )?;
    let info = crate::acquire::wav::probe(&path)?;
    println!(
        "saved {} ({:.1} s)",
        path.display(),
        info.frames as f64 / f64::from(info.sample_rate_hz)
    );
    if let Some(s) = &session {
        let mut entry = crate::capture::run::saved_run(a.pulses_per_rev, &a.note);
        entry.sensitivity_mv_per_unit = a.sensitivity;
        entry.full_scale_volts = a.full_scale_volts;
        crate::capture::run::add_to_session(s, &path, entry)?;
        println!("added to the session {}", s.display());
    }
    println!(
        "track it: tapgrid coastdown {} --out DIR{}",
        path.display(),
        a.sensitivity
            .map_or(String::new(), |v| format!(" --sensitivity {v}"))
    );
    Ok(())
}
