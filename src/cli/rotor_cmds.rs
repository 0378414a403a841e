//! Commands on the rotor at speed: plain-bearing coefficients and the rotor's Campbell diagram,
//! critical speeds, stability threshold and unbalance response.

use super::*;
use crate::rotor::bearing::{FilmMethod, PlainBearing, TwoLobe};
use crate::rotor::campbell::Campbell;
use crate::rotor::run::{AtSpeedOptions, PeakMargin, at_speed};
use crate::rotor::unbalance::ResponsePoint;

pub(super) fn bearing(a: BearingArgs) -> Result<()> {
    let geometry = |p: &PlainArgs, two_lobe| PlainBearing {
        diameter_m: p.diameter_m,
        length_m: p.length_m,
        clearance_m: p.clearance_m,
        viscosity_pa_s: p.viscosity_pa_s,
        load_n: p.load_n,
        two_lobe,
    };
    let (what, b, speed, method) = match &a.kind {
        BearingKind::Plain(p) => (
            "plain bearing",
            geometry(p, None),
            p.speed_rpm,
            match p.method {
                FilmArg::Short => FilmMethod::Short,
                FilmArg::Finite => FilmMethod::Finite,
            },
        ),
        BearingKind::TwoLobe(t) => (
            "two-lobe bearing",
            geometry(
                &t.bearing,
                Some(TwoLobe {
                    preload: t.preload,
                    groove_arc_deg: t.groove_deg,
                }),
            ),
            t.bearing.speed_rpm,
            FilmMethod::Finite,
        ),
    };
    let r = b
        .at_speed(speed, method)
        .map_err(|e| anyhow!("{what}: {e}"))?;
    println!("{}", serde_json::to_string_pretty(&r)?);
    Ok(())
}

/// Parses `LO:HI:COUNT` (rpm, rpm, points).
fn parse_speeds(s: &str) -> Result<(f64, f64, usize)> {
    let parts: Vec<&str> = s.split(':').collect();
    let bad = || anyhow!("--speeds {s:?}: expected LO:HI:COUNT, e.g. 0:12000:121");
    let [lo, hi, n] = parts.as_slice() else {
        return Err(bad());
    };
    let lo: f64 = lo.trim().parse().map_err(|_| bad())?;
    let hi: f64 = hi.trim().parse().map_err(|_| bad())?;
    let n: usize = n.trim().parse().map_err(|_| bad())?;
    if !(lo.is_finite() && hi.is_finite() && lo >= 0.0 && hi > lo && hi <= 1e6) {
        bail!("--speeds {s:?}: need 0 ≤ LO < HI ≤ 1000000 rpm");
    }
    if !(2..=2000).contains(&n) {
        bail!("--speeds {s:?}: COUNT must be 2 to 2000");
    }
    Ok((lo, hi, n))
}

/// What `tapgrid rotor` writes to campbell.json.
#[derive(serde::Serialize)]
struct CampbellFile<'a> {
    #[serde(flatten)]
    campbell: &'a Campbell,
    unbalance_peaks: &'a [PeakMargin],
    model: ModelInfo,
    caution: &'static str,
}

#[derive(serde::Serialize)]
struct ModelInfo {
    elements: usize,
    nodes: usize,
    frame: &'static str,
}

pub(super) fn rotor(a: RotorArgs) -> Result<()> {
    let file = crate::rotor::file::read_rotor(&a.rotor)?;
    let mut o = AtSpeedOptions::for_range(file.operating_range_rpm);
    if let Some(s) = &a.speeds {
        let (lo, hi, n) = parse_speeds(s)?;
        o.speeds_rpm = [lo, hi];
        o.count = n;
    }
    if a.modes == 0 || a.modes > 60 {
        bail!("--modes must be between 1 and 60");
    }
    if !(1..=400).contains(&a.elements) {
        bail!("--elements must be between 1 and 400");
    }
    o.modes = a.modes;
    o.elements = a.elements;
    let r = at_speed(&file, &o).map_err(|e| anyhow!("{}: {e}", a.rotor.display()))?;
    std::fs::create_dir_all(&a.out)
        .with_context(|| format!("{}: cannot create the output folder", a.out.display()))?;
    if !r.response.is_empty() {
        write_unbalance_csv(&a.out.join("unbalance.csv"), &r.response)?;
    }
    let c = &r.campbell;
    let out = CampbellFile {
        campbell: c,
        unbalance_peaks: &r.peaks,
        model: ModelInfo {
            elements: r.nodes_m.len() - 1,
            nodes: r.nodes_m.len(),
            frame: "x along the bearings' static load, y 90° ahead in the spin direction, spin about +z",
        },
        caution: crate::cautions::ROTOR,
    };
    let path = a.out.join("campbell.json");
    crate::atomic::write_derived(&path, serde_json::to_string_pretty(&out)?.as_bytes())
        .with_context(|| format!("{}: cannot write", path.display()))?;
    let [lo, hi] = o.speeds_rpm;
    println!(
        "{}: {} speeds {lo:.0}–{hi:.0} rpm, {} modes tracked",
        a.rotor.display(),
        r.speeds_rpm.len(),
        o.modes
    );
    for cs in &c.critical_speeds {
        println!(
            "critical speed {:>9.1} rpm  {}× {:<8} mode {} at {:.2} Hz, log dec {:.3}",
            cs.speed_rpm,
            cs.order,
            cs.whirl.word(),
            cs.mode,
            cs.frequency_hz,
            cs.log_dec
        );
    }
    match c.stability_threshold_rpm {
        Some(t) => println!(
            "stability threshold {t:.1} rpm (whirl at {:.2} Hz)",
            c.threshold_frequency_hz.unwrap_or(f64::NAN)
        ),
        None => println!("no instability found up to {hi:.0} rpm"),
    }
    for p in &r.peaks {
        println!(
            "response peak at {:.3} m: {:.1} rpm, {:.3e} m, AF {}{}",
            p.peak.position_m,
            p.peak.speed_rpm,
            p.peak.amplitude_m,
            p.peak
                .amplification_factor
                .map_or("—".to_string(), |af| format!("{af:.1}")),
            match (p.clear, p.actual_margin_pct, p.required_margin_pct) {
                (Some(ok), Some(act), Some(req)) => format!(
                    ", margin {act:.1} % ({} {req:.1} %)",
                    if ok { "clear of" } else { "BELOW" }
                ),
                _ => String::new(),
            }
        );
    }
    println!("wrote {}", path.display());
    println!("{}", crate::cautions::ROTOR);
    Ok(())
}

fn write_unbalance_csv(path: &Path, pts: &[ResponsePoint]) -> Result<()> {
    let mut s = String::from("speed_rpm,station_or_position_m,amplitude_m,phase_deg\n");
    for p in pts {
        s.push_str(&format!(
            "{},{},{:e},{}\n",
            p.speed_rpm, p.position_m, p.amplitude_m, p.phase_deg
        ));
    }
    crate::atomic::write_derived(path, s.as_bytes())
        .with_context(|| format!("{}: cannot write", path.display()))
}
