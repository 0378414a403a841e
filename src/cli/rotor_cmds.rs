//! Commands on the rotor at speed: plain-bearing coefficients and the rotor's Campbell diagram,
//! critical speeds, stability threshold and unbalance response.

use super::*;
use crate::model::beam::BeamTheory;
use crate::rotor::bearing::{FilmMethod, PlainBearing};
use crate::rotor::campbell::{Campbell, campbell, speed_grid};
use crate::rotor::unbalance::{Peak, ResponsePoint, peaks, response};

pub(super) fn bearing(a: BearingArgs) -> Result<()> {
    match a.kind {
        BearingKind::Plain(p) => {
            let b = PlainBearing {
                diameter_m: p.diameter_m,
                length_m: p.length_m,
                clearance_m: p.clearance_m,
                viscosity_pa_s: p.viscosity_pa_s,
                load_n: p.load_n,
            };
            let method = match p.method {
                FilmArg::Short => FilmMethod::Short,
                FilmArg::Finite => FilmMethod::Finite,
            };
            let r = b
                .at_speed(p.speed_rpm, method)
                .map_err(|e| anyhow!("plain bearing: {e}"))?;
            println!("{}", serde_json::to_string_pretty(&r)?);
            Ok(())
        }
    }
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
    unbalance_peaks: Vec<PeakLine>,
    model: ModelInfo,
    caution: &'static str,
}

#[derive(serde::Serialize)]
struct ModelInfo {
    elements: usize,
    nodes: usize,
    dofs: usize,
    frame: &'static str,
}

#[derive(serde::Serialize)]
struct PeakLine {
    #[serde(flatten)]
    peak: Peak,
    /// Separation margin the rule asks for, %, and the one there is, below or above the range.
    required_margin_pct: Option<f64>,
    actual_margin_pct: Option<f64>,
    clear: Option<bool>,
}

pub(super) fn rotor(a: RotorArgs) -> Result<()> {
    let file = crate::rotor::file::read_rotor(&a.rotor)?;
    let (lo, hi, n) = match &a.speeds {
        Some(s) => parse_speeds(s)?,
        None => {
            let top = file.operating_range_rpm.map_or(10_000.0, |r| 1.25 * r[1]);
            (0.0, top, 101)
        }
    };
    if a.modes == 0 || a.modes > 60 {
        bail!("--modes must be between 1 and 60");
    }
    if !(1..=400).contains(&a.elements) {
        bail!("--elements must be between 1 and 400");
    }
    let model = file
        .rotor
        .assemble(BeamTheory::Timoshenko, a.elements, &[])
        .map_err(|e| anyhow!("{}: {e}", a.rotor.display()))?;
    let speeds = speed_grid(lo, hi, n);
    let c =
        campbell(&model, &speeds, a.modes).map_err(|e| anyhow!("{}: {e}", a.rotor.display()))?;
    std::fs::create_dir_all(&a.out)
        .with_context(|| format!("{}: cannot create the output folder", a.out.display()))?;
    let mut peak_lines = Vec::new();
    if !file.rotor.unbalances.is_empty() {
        // Stations: every bearing and every unbalance, and the discs.
        let mut positions: Vec<f64> = file
            .rotor
            .bearings
            .iter()
            .map(|b| b.position_m)
            .chain(file.rotor.unbalances.iter().map(|u| u.position_m))
            .chain(file.rotor.shaft.discs.iter().map(|d| d.position_m))
            .collect();
        positions.sort_by(f64::total_cmp);
        positions.dedup_by(|x, y| (*x - *y).abs() < 1e-9);
        // The response on a finer grid than the eigen sweep: peaks of lightly damped modes are
        // narrow (half-power width ≈ 2ζN).
        let fine = speed_grid(lo.max(hi * 1e-3), hi, (4 * n).max(801));
        let pts = response(&model, &file.rotor.unbalances, &fine, &positions)
            .map_err(|e| anyhow!("{}: {e}", a.rotor.display()))?;
        write_unbalance_csv(&a.out.join("unbalance.csv"), &pts)?;
        let rule = crate::model::margin::MarginRule::default();
        for &x in &positions {
            let curve: Vec<&ResponsePoint> = pts.iter().filter(|p| p.position_m == x).collect();
            let sp: Vec<f64> = curve.iter().map(|p| p.speed_rpm).collect();
            let am: Vec<f64> = curve.iter().map(|p| p.amplitude_m).collect();
            for pk in peaks(x, &sp, &am) {
                let (req, act, clear) = match (file.operating_range_rpm, pk.amplification_factor) {
                    (Some([rlo, rhi]), Some(af)) => {
                        let (req, act) = if pk.speed_rpm < rlo {
                            (rule.below_pct(af), 100.0 * (rlo - pk.speed_rpm) / rlo)
                        } else if pk.speed_rpm > rhi {
                            (rule.above_pct(af), 100.0 * (pk.speed_rpm - rhi) / rhi)
                        } else {
                            (rule.below_pct(af).max(rule.above_pct(af)), 0.0)
                        };
                        (Some(req), Some(act), Some(act >= req))
                    }
                    _ => (None, None, None),
                };
                peak_lines.push(PeakLine {
                    peak: pk,
                    required_margin_pct: req,
                    actual_margin_pct: act,
                    clear,
                });
            }
        }
    }
    let out = CampbellFile {
        campbell: &c,
        unbalance_peaks: peak_lines,
        model: ModelInfo {
            elements: model.nodes_m.len() - 1,
            nodes: model.nodes_m.len(),
            dofs: model.dofs(),
            frame: "x along the bearings' static load, y 90° ahead in the spin direction, spin about +z",
        },
        caution: crate::cautions::ROTOR,
    };
    let path = a.out.join("campbell.json");
    crate::atomic::write_derived(&path, serde_json::to_string_pretty(&out)?.as_bytes())
        .with_context(|| format!("{}: cannot write", path.display()))?;
    // A summary a person reads.
    println!(
        "{}: {} speeds {lo:.0}–{hi:.0} rpm, {} modes tracked",
        a.rotor.display(),
        speeds.len(),
        a.modes
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
