//! Does the data obey the physics it must? Checks a practitioner makes on every impact test
//! before trusting a mode: the driving point's signs and its alternating resonances and
//! antiresonances, the mass line of a free part against the model's mass, reciprocity between
//! two references, linearity between two force levels, and whether the station grid and the
//! reference let the modes be told apart. Each check says in words what a failure means.
//!
//! Sources (field notes §2): with e^{+jωt} and the response positive in the force direction,
//! Im(accelerance) ≥ 0 at a driving point (every residue φ_r² is positive) and > 0 at every
//! resonance; resonances and antiresonances alternate; a free-free part's driving-point
//! accelerance between its rigid-body and first bending modes is the mass line 1/m + e²/J
//! (4/m at an end of a uniform shaft); H_jk = H_kj (Maxwell–Betti reciprocity, Ewins 2000).
//! Tolerances are common practice and stated with each check.

use serde::Serialize;

use crate::Complex64;
use crate::analysis::{Analysis, Dataset};
use crate::modal::{FrfSet, ModalResult};
use crate::model::beam::{BeamTheory, Shaft};
use crate::model::run::{converged_modes, interpolate};
use crate::setup::Layout;

/// One check's outcome.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Check {
    /// Short name (`driving_point_sign`, …).
    pub name: &'static str,
    /// Passed, failed, or `None` when the data cannot tell (not applicable).
    pub passed: Option<bool>,
    /// The figure the verdict rests on, when there is one.
    pub value: Option<f64>,
    /// What it found and what it means, in words.
    pub words: String,
}

impl Check {
    fn na(name: &'static str, words: impl Into<String>) -> Self {
        Self {
            name,
            passed: None,
            value: None,
            words: words.into(),
        }
    }
}

/// Lines worth judging: inside the band where the coherence is at least `min_coherence`.
fn good_lines(set: &FrfSet, o: usize, min_coherence: f64) -> Vec<usize> {
    let edge = set.usable_hi_hz.get(o).copied().unwrap_or(f64::INFINITY);
    (0..set.freq_hz.len())
        .filter(|&k| set.coherence[o][k] >= min_coherence && set.freq_hz[k] <= edge)
        .collect()
}

fn value_at(set: &FrfSet, o: usize, f: f64) -> Complex64 {
    let k = crate::numeric::nearest_index(&set.freq_hz, f);
    set.h[o][k]
}

/// Driving point: share of Im(A) that is positive, and the sign at each mode.
pub fn driving_point_sign(set: &FrfSet, modes: &ModalResult) -> Check {
    const NAME: &str = "driving_point_sign";
    if set.layout != Layout::Hammer {
        return Check::na(
            NAME,
            "a roving-sensor test measures transmissibility, not a driving point",
        );
    }
    let Some(r) = set.reference else {
        return Check::na(
            NAME,
            "no reference station is set, so no FRF is known to be the driving point",
        );
    };
    let lines = good_lines(set, r, 0.8);
    let (mut pos, mut all) = (0.0, 0.0);
    for &k in &lines {
        let im = set.h[r][k].im;
        all += im.abs();
        pos += im.max(0.0);
    }
    if all <= 0.0 {
        return Check::na(
            NAME,
            "the driving point's FRF has no coherent line to judge",
        );
    }
    let share = pos / all;
    let negative: Vec<String> = modes
        .modes
        .iter()
        .filter(|m| value_at(set, r, m.measured_frequency_hz).im <= 0.0)
        .map(|m| format!("{:.1}", m.frequency_hz))
        .collect();
    let st = set.stations[r];
    let (passed, words) = if share >= 0.8 && negative.is_empty() {
        (
            true,
            format!(
                "station {st} (the reference) reads as a driving point: {:.0} % of Im(accelerance) \
                 is positive and it is positive at every mode",
                100.0 * share
            ),
        )
    } else if share <= 0.2 {
        (
            false,
            format!(
                "station {st}'s Im(accelerance) is negative ({:.0} % positive): the polarity of \
                 one channel is inverted (hammer or accelerometer, cable or setup sign), or the \
                 reference station is not station {st}",
                100.0 * share
            ),
        )
    } else {
        (
            false,
            format!(
                "station {st} does not read as a driving point ({:.0} % of Im(accelerance) \
                 positive{}): the accelerometer is not at station {st} (wrong reference station), \
                 or it and the hammer act in different directions",
                100.0 * share,
                if negative.is_empty() {
                    String::new()
                } else {
                    format!("; negative at {} Hz", negative.join(", "))
                }
            ),
        )
    };
    Check {
        name: NAME,
        passed: Some(passed),
        value: Some(share),
        words,
    }
}

/// Roving sensor: where the roving accelerometer sits at the reference's station the
/// transmissibility is +1 (the same motion seen twice); −1 means the two accelerometers read
/// with opposite polarity.
pub fn sensor_polarity(set: &FrfSet) -> Check {
    const NAME: &str = "sensor_polarity";
    if set.layout != Layout::Sensor {
        return Check::na(NAME, "applies to a roving-sensor test");
    }
    let Some(r) = set.reference else {
        return Check::na(NAME, "no reference station is set");
    };
    let mut re: Vec<f64> = good_lines(set, r, 0.9)
        .into_iter()
        .map(|k| set.h[r][k].re)
        .collect();
    if re.len() < 5 {
        return Check::na(NAME, "too few coherent lines at the reference station");
    }
    re.sort_by(f64::total_cmp);
    let m = re[re.len() / 2];
    let st = set.stations[r];
    // Common practice: the same motion seen by two sensors agrees within their calibrations.
    let passed = (m - 1.0).abs() < 0.2;
    Check {
        name: NAME,
        passed: Some(passed),
        value: Some(m),
        words: if passed {
            format!(
                "at station {st} the roving and reference accelerometers agree (transmissibility \
                 {m:.2}): same polarity, sensitivities consistent"
            )
        } else if m < 0.0 {
            format!(
                "at station {st} the transmissibility is {m:.2}: the roving and reference \
                 accelerometers read with opposite polarity (a sensor mounted upside down, a \
                 cable or a sign in the setup)"
            )
        } else {
            format!(
                "at station {st} the transmissibility is {m:.2}, not 1: the two sensitivities \
                 entered do not match the sensors, or the roving sensor was not at the \
                 reference's place"
            )
        },
    }
}

/// Driving point: an antiresonance between every two neighbouring modes.
pub fn alternation(set: &FrfSet, modes: &ModalResult) -> Check {
    const NAME: &str = "resonance_antiresonance_alternation";
    let Some(r) = set.reference.filter(|_| set.layout == Layout::Hammer) else {
        return Check::na(
            NAME,
            "needs a driving point (roving hammer with a reference station)",
        );
    };
    let f: Vec<f64> = modes
        .modes
        .iter()
        .map(|m| m.measured_frequency_hz)
        .collect();
    if f.len() < 2 {
        return Check::na(
            NAME,
            "fewer than two modes to have an antiresonance between",
        );
    }
    let mut missing = Vec::new();
    let mut worst = 0.0f64;
    for w in f.windows(2) {
        let (a, b) = (w[0], w[1]);
        let peak = value_at(set, r, a).norm().min(value_at(set, r, b).norm());
        let k0 = set.freq_hz.partition_point(|&x| x <= a);
        let k1 = set.freq_hz.partition_point(|&x| x < b);
        let dip = (k0..k1)
            .map(|k| set.h[r][k].norm())
            .fold(f64::INFINITY, f64::min);
        let ratio = if peak > 0.0 { dip / peak } else { 1.0 };
        worst = worst.max(ratio);
        // An antiresonance is a dip well below both neighbouring peaks (common practice: a
        // tenth); a transfer FRF may only sag between them.
        if ratio > 0.1 {
            missing.push(format!("{a:.0}–{b:.0} Hz"));
        }
    }
    let st = set.stations[r];
    Check {
        name: NAME,
        passed: Some(missing.is_empty()),
        value: Some(worst),
        words: if missing.is_empty() {
            format!("station {st}: an antiresonance lies between every two neighbouring modes")
        } else {
            format!(
                "station {st}: no antiresonance between {} — the FRF behaves as a transfer, not \
                 a driving point: check the reference station",
                missing.join(", ")
            )
        },
    }
}

/// Free part: the measured driving-point accelerance below the first bending mode against the
/// model's (its mass and rotary inertia: the mass line, plus the bending modes' share).
pub fn mass_line(set: &FrfSet, modes: &ModalResult, shaft: Option<&Shaft>) -> Check {
    const NAME: &str = "mass_line";
    let Some(r) = set.reference.filter(|_| set.layout == Layout::Hammer) else {
        return Check::na(
            NAME,
            "needs a driving point (roving hammer with a reference station)",
        );
    };
    let Some(shaft) = shaft else {
        return Check::na(NAME, "needs a shaft model for the part's mass");
    };
    let mut free = shaft.clone();
    free.supports.clear();
    let c = match converged_modes(&free, BeamTheory::Timoshenko, 10, &[]) {
        Ok(c) => c,
        Err(e) => return Check::na(NAME, format!("the model cannot be solved: {e}")),
    };
    let x = set.positions_m[r];
    let f1 = c
        .modes
        .iter()
        .find(|m| !m.rigid_body)
        .map_or(f64::INFINITY, |m| m.frequency_hz);
    let measured_f1 = modes.modes.first().map_or(f1, |m| m.frequency_hz);
    let hi = 0.45 * f1.min(measured_f1);
    let lo = (0.15 * f1.min(measured_f1)).max(set.freq_hz.first().copied().unwrap_or(0.0));
    let lines: Vec<usize> = good_lines(set, r, 0.9)
        .into_iter()
        .filter(|&k| set.freq_hz[k] >= lo && set.freq_hz[k] <= hi)
        .collect();
    if lines.len() < 3 {
        return Check::na(
            NAME,
            format!(
                "too few coherent lines between {lo:.0} and {hi:.0} Hz (below the first bending \
                 mode) to read the mass line"
            ),
        );
    }
    let model_at = |f: f64| -> f64 {
        let w2 = (2.0 * std::f64::consts::PI * f).powi(2);
        c.modes
            .iter()
            .map(|m| {
                let phi = interpolate(&c.nodes_m, &m.displacement, x);
                if m.rigid_body {
                    phi * phi
                } else {
                    let wr2 = (2.0 * std::f64::consts::PI * m.frequency_hz).powi(2);
                    phi * phi * w2 / (w2 - wr2)
                }
            })
            .sum::<f64>()
            .abs()
    };
    let mut ratios: Vec<f64> = lines
        .iter()
        .map(|&k| set.h[r][k].norm() / model_at(set.freq_hz[k]))
        .filter(|v| v.is_finite())
        .collect();
    if ratios.is_empty() {
        return Check::na(NAME, "the model's mass line is zero at the reference");
    }
    ratios.sort_by(f64::total_cmp);
    let ratio = ratios[ratios.len() / 2];
    let mass_line = rigid_sum(&c, x);
    let st = set.stations[r];
    // Within ±25 % (common practice: sensitivities from a data sheet are good to a few per
    // cent; a factor of 2, 10 or 9.81 is a unit or range slip).
    let passed = (0.8..=1.25).contains(&ratio);
    Check {
        name: NAME,
        passed: Some(passed),
        value: Some(ratio),
        words: if passed {
            format!(
                "station {st}: the measured accelerance between {lo:.0} and {hi:.0} Hz is {:.2}× \
                 the model's (mass line {:.4} (m/s²)/N at {x:.3} m): sensitivities and the part's \
                 mass agree",
                ratio, mass_line
            )
        } else {
            format!(
                "station {st}: the measured accelerance between {lo:.0} and {hi:.0} Hz is {:.2}× \
                 the model's mass line ({:.4} (m/s²)/N at {x:.3} m){}: check the sensitivities \
                 (mV/N, mV/(m/s²)), the full-scale volts, the part's mass in the model, and that \
                 the part hangs free",
                ratio,
                mass_line,
                if (ratio - 9.81).abs() < 1.0 || (1.0 / ratio - 9.81).abs() < 1.0 {
                    " — about g: a sensitivity in mV/g entered as mV/(m/s²), or the reverse"
                } else {
                    ""
                }
            )
        },
    }
}

fn rigid_sum(c: &crate::model::run::Converged, x: f64) -> f64 {
    c.modes
        .iter()
        .filter(|m| m.rigid_body)
        .map(|m| interpolate(&c.nodes_m, &m.displacement, x).powi(2))
        .sum()
}

/// The mass line of `shaft` hanging free, at `x`: Σ over the rigid-body modes of φ(x)² with
/// mass-normalised shapes — 1/m + e²/J, e the distance from the centre of gravity.
pub fn model_mass_line(shaft: &Shaft, x: f64) -> Result<f64, String> {
    let mut free = shaft.clone();
    free.supports.clear();
    let c = converged_modes(&free, BeamTheory::Timoshenko, 4, &[])?;
    Ok(rigid_sum(&c, x))
}

/// Two tests with references r and k: H_rk from the first against H_kr from the second.
pub fn reciprocity(a: &FrfSet, b: &FrfSet) -> Check {
    const NAME: &str = "reciprocity";
    let (Some(ra), Some(rb)) = (a.reference, b.reference) else {
        return Check::na(NAME, "both tests need their reference station set");
    };
    let (sa, sb) = (a.stations[ra], b.stations[rb]);
    if sa == sb {
        return Check::na(NAME, "both tests have the same reference station");
    }
    // In the first test the hammer at station sb and the accelerometer at sa: H(sa ← sb); the
    // second, the reverse.
    let (Some(ka), Some(kb)) = (
        a.stations.iter().position(|&s| s == sb),
        b.stations.iter().position(|&s| s == sa),
    ) else {
        return Check::na(
            NAME,
            format!("the first test has no FRF at station {sb} or the second none at station {sa}"),
        );
    };
    let mut db = Vec::new();
    let mut deg = Vec::new();
    for (k, &f) in a.freq_hz.iter().enumerate() {
        if a.coherence[ka][k] < 0.9 {
            continue;
        }
        let j = crate::numeric::nearest_index(&b.freq_hz, f);
        if (b.freq_hz[j] - f).abs() > 0.51 * a.df_hz.max(b.df_hz) || b.coherence[kb][j] < 0.9 {
            continue;
        }
        let (x, y) = (a.h[ka][k], b.h[kb][j]);
        if x.norm() == 0.0 || y.norm() == 0.0 {
            continue;
        }
        db.push((20.0 * (x.norm() / y.norm()).log10()).abs());
        deg.push((x / y).arg().to_degrees().abs());
    }
    if db.len() < 5 {
        return Check::na(NAME, "too few lines coherent in both tests to compare");
    }
    db.sort_by(f64::total_cmp);
    deg.sort_by(f64::total_cmp);
    let (mdb, mdeg) = (db[db.len() / 2], deg[deg.len() / 2]);
    // Within 1 dB and 10° at the median line (common practice for a bench test).
    let passed = mdb < 1.0 && mdeg < 10.0;
    Check {
        name: NAME,
        passed: Some(passed),
        value: Some(mdb),
        words: if passed {
            format!(
                "H({sa}←{sb}) and H({sb}←{sa}) agree: median {mdb:.2} dB and {mdeg:.1}° apart over \
                 {} coherent lines",
                db.len()
            )
        } else {
            format!(
                "H({sa}←{sb}) and H({sb}←{sa}) differ: median {mdb:.2} dB and {mdeg:.1}° apart: \
                 the sensitivities of the two setups differ, a station or direction differs, or \
                 the part is not linear"
            )
        },
    }
}

/// Linearity: stations tapped at two force levels, each level's FRF on its own.
pub fn linearity(data: &Dataset, analysis: &Analysis) -> Check {
    const NAME: &str = "linearity";
    let mut worst_db = 0.0f64;
    let mut judged = Vec::new();
    for s in &analysis.stations {
        let acc: Vec<(usize, f64)> = s
            .result
            .hits
            .iter()
            .filter(|h| h.accepted)
            .map(|h| (h.index, h.peak_a_fs))
            .collect();
        if acc.len() < 2 {
            continue;
        }
        let mut sorted = acc.clone();
        sorted.sort_by(|a, b| a.1.total_cmp(&b.1));
        // Two levels: the largest jump between neighbouring peak forces is at least 1.6×.
        let (cut, jump) = sorted
            .windows(2)
            .enumerate()
            .map(|(i, w)| (i + 1, w[1].1 / w[0].1.max(1e-12)))
            .fold((0, 0.0), |b, x| if x.1 > b.1 { x } else { b });
        if jump < 1.6 {
            continue;
        }
        let Some(src) = data.stations.iter().find(|d| d.station == s.station) else {
            continue;
        };
        let group = |keep: &[(usize, f64)]| {
            let mut one = src.clone();
            for (i, _) in &acc {
                one.overrides.insert(*i, keep.iter().any(|k| k.0 == *i));
            }
            let d = Dataset {
                stations: vec![one],
                origin: data.origin.clone(),
            };
            crate::analysis::run(&d, &analysis.setup)
                .ok()
                .and_then(|a| a.stations.into_iter().next())
                .and_then(|s| s.result.frf)
        };
        let (Some(lo), Some(hi)) = (group(&sorted[..cut]), group(&sorted[cut..])) else {
            continue;
        };
        let Some(main) = &s.result.frf else { continue };
        let mut d: Vec<f64> = (0..lo.h.len().min(hi.h.len()).min(main.coherence.len()))
            .filter(|&k| main.coherence[k] >= 0.9 && lo.h[k].norm() > 0.0 && hi.h[k].norm() > 0.0)
            .map(|k| (20.0 * (hi.h[k].norm() / lo.h[k].norm()).log10()).abs())
            .collect();
        if d.len() < 5 {
            continue;
        }
        d.sort_by(f64::total_cmp);
        let m = d[d.len() / 2];
        worst_db = worst_db.max(m);
        judged.push(format!(
            "station {} ({:.1}× force): {m:.2} dB",
            s.station, jump
        ));
    }
    if judged.is_empty() {
        return Check::na(
            NAME,
            "no station was tapped at two force levels (a jump of 1.6× or more between its \
             hits' peaks): tap one station softly and firmly to check linearity",
        );
    }
    // Within 1 dB at the median coherent line (common practice; ISO 7626-5 asks for a
    // linearity check by varying the impact level).
    let passed = worst_db < 1.0;
    Check {
        name: NAME,
        passed: Some(passed),
        value: Some(worst_db),
        words: if passed {
            format!(
                "FRFs at two force levels agree (median difference {}): linear within the noise",
                judged.join("; ")
            )
        } else {
            format!(
                "FRFs at two force levels differ ({}): the part or its fixture is not linear \
                 (loose fit, rattling support, contact), or one level overloads a channel",
                judged.join("; ")
            )
        },
    }
}

/// The grid and the reference against the measured shapes: modes the grid cannot tell apart
/// (auto-MAC) and modes the reference barely sees (near a node).
pub fn spatial(set: &FrfSet, modes: &ModalResult) -> Vec<Check> {
    let mut out = Vec::new();
    let n = modes.modes.len();
    let mut pairs = Vec::new();
    let mut worst = 0.0f64;
    for i in 0..n {
        for j in i + 1..n {
            let v = modes
                .auto_mac
                .get(i)
                .and_then(|r| r.get(j))
                .copied()
                .unwrap_or(0.0);
            worst = worst.max(v);
            if v > 0.5 {
                pairs.push(format!(
                    "{:.0} and {:.0} Hz (MAC {v:.2})",
                    modes.modes[i].frequency_hz, modes.modes[j].frequency_hz
                ));
            }
        }
    }
    out.push(if n < 2 {
        Check::na("spatial_aliasing", "fewer than two modes")
    } else {
        Check {
            name: "spatial_aliasing",
            passed: Some(pairs.is_empty()),
            value: Some(worst),
            words: if pairs.is_empty() {
                format!("the stations tell every two modes apart (auto-MAC at most {worst:.2})")
            } else {
                format!(
                    "the stations cannot tell apart {}: too few stations for these shapes \
                     (spatial aliasing), or a pair of planes of one mode; add stations (see \
                     `tapgrid plan`)",
                    pairs.join(", ")
                )
            },
        }
    });
    if let Some(r) = set.reference {
        let ref_station = set.stations[r];
        let k = modes.stations.iter().position(|&s| s == ref_station);
        let weak: Vec<String> = modes
            .modes
            .iter()
            .filter_map(|m| {
                let at = m.shape.get(k?)?.norm();
                let peak = m.shape.iter().fold(0.0f64, |a, v| a.max(v.norm()));
                (peak > 0.0 && at < 0.1 * peak)
                    .then(|| format!("{:.0} Hz ({:.0} %)", m.frequency_hz, 100.0 * at / peak))
            })
            .collect();
        out.push(Check {
            name: "reference_near_node",
            passed: Some(weak.is_empty()),
            value: None,
            words: if weak.is_empty() {
                format!("the reference (station {ref_station}) sees every mode at 10 % of its peak or more")
            } else {
                format!(
                    "the reference (station {ref_station}) sits near a node of {}: those modes are \
                     weak in every FRF; move the reference (see `tapgrid plan`)",
                    weak.join(", ")
                )
            },
        });
    }
    out
}

/// Every check that applies to a test (a second test with another reference for reciprocity).
pub fn physics(
    data: &Dataset,
    analysis: &Analysis,
    set: &FrfSet,
    modes: &ModalResult,
    shaft: Option<&Shaft>,
    second: Option<&FrfSet>,
) -> Vec<Check> {
    let mut out = vec![
        driving_point_sign(set, modes),
        alternation(set, modes),
        mass_line(set, modes, shaft),
        sensor_polarity(set),
    ];
    out.push(match second {
        Some(b) => reciprocity(set, b),
        None => Check::na(
            "reciprocity",
            "needs a second test with the reference at another station (--second)",
        ),
    });
    out.push(linearity(data, analysis));
    out.extend(spatial(set, modes));
    out
}

/// The checks as text, one paragraph each.
pub fn checks_text(checks: &[Check]) -> String {
    let mut s = String::new();
    for c in checks {
        let tag = match c.passed {
            Some(true) => "ok     ",
            Some(false) => "FAILED ",
            None => "n/a    ",
        };
        s.push_str(&format!("{tag} {}: {}\n", c.name, c.words));
    }
    s
}
