//! The simulator's command.

use super::*;

pub(super) fn simulate(a: SimulateArgs) -> Result<()> {
    if let Some(run) = &a.run {
        let sc = if run == "default" {
            crate::sim::run::RunScenario::default()
        } else {
            let text =
                std::fs::read_to_string(run).with_context(|| format!("{run}: cannot read"))?;
            serde_json::from_str(&text)
                .with_context(|| format!("{run}: not a valid run scenario"))?
        };
        let truth = sc.write(&a.out)?;
        println!(
            "wrote {} (critical speeds {:?} rpm)",
            a.out.join("run.wav").display(),
            truth.critical_speeds_rpm
        );
        return Ok(());
    }
    let mut sc = match &a.scenario {
        Some(p) => {
            let text = std::fs::read_to_string(p)
                .with_context(|| format!("{}: cannot read", p.display()))?;
            serde_json::from_str::<Scenario>(&text)
                .with_context(|| format!("{}: not a valid scenario", p.display()))?
        }
        None => Scenario::pump_shaft(),
    };
    if let Some(l) = a.layout {
        sc.set_layout(l.into());
    }
    if let Some(n) = a.stations {
        if n < 2 {
            bail!("--stations must be at least 2");
        }
        let l = sc.shaft.length_m();
        sc.stations_m = (0..n).map(|i| l * (i as f64 / (n - 1) as f64)).collect();
        sc.drive_station = sc.drive_station.min(n as u32);
        sc.reference_station = sc.reference_station.min(n as u32);
    }
    if let Some(h) = a.hits {
        sc.hits_per_station = h;
    }
    if let Some(fs) = a.fs {
        sc.rig.sample_rate_hz = fs;
    }
    if let Some(e) = a.encoding {
        sc.rig.encoding = e.into();
    }
    if let Some(z) = a.damping {
        sc.damping_ratio = z;
    }
    for d in &a.double_hit {
        sc.double_hits.push(station_hit(d)?);
    }
    for o in &a.overload {
        sc.overloads.push(station_hit(o)?);
    }
    for w in &a.weak {
        sc.weak_hits.push(station_hit(w)?);
    }
    for s in &a.soft {
        sc.soft_hits.push(station_hit(s)?);
    }
    if let Some(p) = a.pulse {
        if !(p.is_finite() && p > 0.0 && p < 0.05) {
            bail!("--pulse {p} s must be between 0 and 0.05 s");
        }
        sc.pulse_s = p;
    }
    if let Some(sp) = &a.second_plane {
        let (s, g) = sp
            .split_once(':')
            .ok_or_else(|| anyhow!("expected --second-plane SPLIT:ANGLE, got {sp:?}"))?;
        let (split, angle_deg): (f64, f64) = (s.trim().parse()?, g.trim().parse()?);
        if !(split.is_finite() && split > 0.0 && split < 0.5 && angle_deg.is_finite()) {
            bail!("--second-plane {sp}: SPLIT must be in (0, 0.5) and ANGLE a number of degrees");
        }
        sc.second_plane = Some(tapgrid_second_plane(split, angle_deg));
    }
    if let Some(n) = a.noise {
        sc.rig.noise_volts = [n, n];
    }
    if let Some(h) = a.hum {
        sc.rig.hum_volts = h;
    }
    if let Some(s) = a.seed {
        sc.seed = s;
    }
    if let Some(i) = a.interval {
        sc.hit_interval_s = i;
    }
    let truth = sc.write(&a.out)?;
    println!(
        "wrote {} stations × {} hits to {}; modes below 0.45 fs:",
        sc.stations_m.len(),
        sc.hits_per_station,
        a.out.display()
    );
    for m in &truth.modes {
        println!("  {:9.2} Hz  ζ = {:.4}", m.frequency_hz, m.damping_ratio);
    }
    Ok(())
}
