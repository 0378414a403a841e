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
    crate::atomic::write_derived(&result, serde_json::to_string_pretty(&r)?.as_bytes())
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
    println!("wrote {} and {}", tracking.display(), result.display());
    println!(
        "Advisory. Recording a run means a machine turning: guards on, stay clear of rotating \
         parts and follow the site's procedure."
    );
    Ok(())
}
