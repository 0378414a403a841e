//! A test planned before the hammer is picked up: from the shaft model and the band wanted, the
//! modes to expect and their nodes, where the reference accelerometer must not go and where it
//! sees every mode best, how many stations keep the in-band modes apart (auto-MAC), where to
//! hang a free-free part, the hammer tip the band needs and the record length the damping needs.
//!
//! Sources: free-free node positions (field notes §5: mode 1 at 0.2242L and 0.7758L); the
//! half-sine force spectrum (−10 dB at 1.02/T_c, −20 dB at 1.30/T_c, first null at 1.5/T_c;
//! field notes §1); record length T ≥ 6/(ζω_n) for truncation error under 0.5 % (Trethewey &
//! Cafeo 1992) and ≥ 5 lines in the half-power band 2ζf_n (common practice).

use serde::Serialize;

use super::beam::{BeamTheory, Shaft};
use super::run::{converged_modes, interpolate};

/// What the plan is for.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanOptions {
    /// Band of interest, Hz.
    pub band_hz: [f64; 2],
    /// Stations the person means to use (`None`: the plan proposes a count).
    pub stations: Option<usize>,
    /// Damping ratio expected of the part's modes.
    pub damping_ratio: f64,
    /// The reference must stay farther than this fraction of the length from any in-band node.
    pub node_fraction: f64,
    /// Sample rate of the recording, Hz.
    pub sample_rate_hz: f64,
}

impl Default for PlanOptions {
    fn default() -> Self {
        Self {
            band_hz: [0.0, 2000.0],
            stations: None,
            damping_ratio: 0.002,
            node_fraction: 0.05,
            sample_rate_hz: 51_200.0,
        }
    }
}

/// A mode expected in the band.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlannedMode {
    /// Bending mode number among the flexible modes (1 = lowest).
    pub number: usize,
    /// Natural frequency, Hz.
    pub frequency_hz: f64,
    /// Nodes along the part, m.
    pub nodes_m: Vec<f64>,
}

/// Where the reference goes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReferencePlan {
    /// Stretches to avoid (within the node fraction of a node of an in-band mode), m.
    pub avoid_m: Vec<[f64; 2]>,
    /// The stretches left, m.
    pub allowed_m: Vec<[f64; 2]>,
    /// The best places, best first: where the weakest in-band mode is strongest.
    pub best_m: Vec<f64>,
    /// At each best place, the weakest in-band mode's amplitude as a fraction of its largest.
    pub best_score: Vec<f64>,
}

/// The station grid.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StationPlan {
    /// Stations (evenly spaced, both ends included).
    pub count: usize,
    /// Their positions, m.
    pub positions_m: Vec<f64>,
    /// Auto-MAC of the in-band modes on this grid.
    pub auto_mac: Vec<Vec<f64>>,
    /// Largest off-diagonal auto-MAC.
    pub max_off_diagonal_mac: f64,
    /// Fewest stations with the off-diagonal auto-MAC below 0.5 and every mode's largest
    /// sampled amplitude at least 0.7 of its true largest.
    pub minimum_count: usize,
    /// Fewest stations that also put two stations on every lobe between neighbouring nodes of
    /// every in-band mode (so each shape's sign changes are drawn, not guessed).
    pub recommended_count: usize,
    /// The count was given by the person (else it is the recommended one).
    pub given: bool,
}

/// The hammer.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HammerPlan {
    /// Longest contact time keeping the force within 10 dB at the band's top, s.
    pub max_contact_s_10db: f64,
    /// Longest contact time keeping it within 20 dB, s.
    pub max_contact_s_20db: f64,
    /// Contact time that puts the first null of the force spectrum at the band's top, s.
    pub null_at_band_top_s: f64,
    /// The tip in words.
    pub advice: String,
}

/// The record.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RecordPlan {
    /// For the ringing of the lowest in-band mode to decay (T ≥ 6/(ζω_n)), s.
    pub decay_s: f64,
    /// For five lines in its half-power band (T ≥ 5/(2ζf_n)), s.
    pub resolution_s: f64,
    /// The longer of the two, s.
    pub length_s: f64,
    /// Samples at the planned rate (the fewest at least that long with no prime factor above 5,
    /// which the FFT handles fast).
    pub samples: usize,
    /// The taps must be at least this far apart, s (the record plus a pretrigger).
    pub tap_spacing_s: f64,
}

/// The plan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TestPlan {
    /// Length of the part, m.
    pub length_m: f64,
    /// No supports: a free-free test.
    pub free_free: bool,
    /// Band, Hz.
    pub band_hz: [f64; 2],
    /// Flexible modes in the band.
    pub modes: Vec<PlannedMode>,
    /// The first flexible mode above the band (excited anyway by a hard tip), Hz.
    pub next_above_hz: Option<f64>,
    /// The reference.
    pub reference: ReferencePlan,
    /// The stations.
    pub stations: StationPlan,
    /// Where to hang a free-free part (the first flexible mode's nodes), m.
    pub suspension_m: Vec<f64>,
    /// The hammer.
    pub hammer: HammerPlan,
    /// The record.
    pub record: RecordPlan,
    /// What a person should know.
    pub warnings: Vec<String>,
}

/// Nodes of a shape given at `nodes` (sign changes, linearly interpolated).
fn zero_crossings(nodes: &[f64], v: &[f64]) -> Vec<f64> {
    let peak = v.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    let mut out = Vec::new();
    for i in 1..v.len() {
        let (a, b) = (v[i - 1], v[i]);
        // A value that only touches zero (a pinned support) counts once.
        if a.abs() <= 1e-9 * peak {
            if i == 1
                || out
                    .last()
                    .is_none_or(|&x: &f64| (x - nodes[i - 1]).abs() > 1e-12)
            {
                out.push(nodes[i - 1]);
            }
            continue;
        }
        if a * b < 0.0 {
            out.push(nodes[i - 1] + (nodes[i] - nodes[i - 1]) * a / (a - b));
        }
    }
    if v.last().is_some_and(|x| x.abs() <= 1e-9 * peak) {
        out.push(*nodes.last().unwrap_or(&0.0));
    }
    out
}

fn real_mac(a: &[f64], b: &[f64]) -> f64 {
    let ab: f64 = a.iter().zip(b).map(|(x, y)| x * y).sum();
    let aa: f64 = a.iter().map(|x| x * x).sum();
    let bb: f64 = b.iter().map(|x| x * x).sum();
    if aa > 0.0 && bb > 0.0 {
        ab * ab / (aa * bb)
    } else {
        1.0
    }
}

fn grid(length: f64, n: usize) -> Vec<f64> {
    (0..n)
        .map(|i| length * (i as f64 / (n - 1) as f64))
        .collect()
}

/// Auto-MAC matrix, its largest off-diagonal value and the smallest fraction of a mode's largest
/// amplitude that the grid samples.
fn grid_quality(shapes: &[(Vec<f64>, Vec<f64>)], at: &[f64]) -> (Vec<Vec<f64>>, f64, f64) {
    let sampled: Vec<Vec<f64>> = shapes
        .iter()
        .map(|(x, v)| at.iter().map(|&p| interpolate(x, v, p)).collect())
        .collect();
    let n = sampled.len();
    let mut m = vec![vec![0.0; n]; n];
    let mut worst = 0.0f64;
    for i in 0..n {
        for j in 0..n {
            m[i][j] = real_mac(&sampled[i], &sampled[j]);
            if i != j {
                worst = worst.max(m[i][j]);
            }
        }
    }
    let reach = shapes
        .iter()
        .zip(&sampled)
        .map(|((_, v), s)| {
            let full = v.iter().fold(0.0f64, |a, x| a.max(x.abs()));
            let got = s.iter().fold(0.0f64, |a, x| a.max(x.abs()));
            if full > 0.0 { got / full } else { 0.0 }
        })
        .fold(1.0f64, f64::min);
    (m, worst, reach)
}

/// The smallest n ≥ `at_least` whose only prime factors are 2, 3 and 5.
fn smooth_at_least(at_least: usize) -> usize {
    let mut n = at_least.max(1);
    loop {
        let mut m = n;
        for p in [2, 3, 5] {
            while m.is_multiple_of(p) {
                m /= p;
            }
        }
        if m == 1 {
            return n;
        }
        n += 1;
    }
}

/// Most stations a plan proposes.
pub const MAX_STATIONS: usize = 200;

/// Plans the test of `shaft` over `o.band_hz`.
pub fn plan(shaft: &Shaft, o: &PlanOptions) -> Result<TestPlan, String> {
    let [lo, hi] = o.band_hz;
    if !(lo.is_finite() && hi.is_finite() && lo >= 0.0 && hi > lo) {
        return Err(format!("band {lo}–{hi} Hz: give LO < HI, both ≥ 0"));
    }
    if !(o.damping_ratio.is_finite() && o.damping_ratio > 0.0 && o.damping_ratio < 0.5) {
        return Err(format!(
            "damping ratio {} must lie between 0 and 0.5",
            o.damping_ratio
        ));
    }
    if !(o.node_fraction.is_finite() && o.node_fraction > 0.0 && o.node_fraction < 0.25) {
        return Err("the node fraction must lie between 0 and 0.25 of the length".into());
    }
    if !(o.sample_rate_hz.is_finite() && o.sample_rate_hz >= 2.0 * hi) {
        return Err(format!(
            "sample rate {} Hz cannot hold a band up to {hi} Hz (it needs more than twice that)",
            o.sample_rate_hz
        ));
    }
    if let Some(n) = o.stations
        && !(2..=MAX_STATIONS).contains(&n)
    {
        return Err(format!("{n} stations: give 2 to {MAX_STATIONS}"));
    }
    let length = shaft.length_m();
    let free_free = shaft.supports.is_empty();
    // Enough modes to pass the band's top (a free part's six rigid-body modes come first).
    let mut count = 8;
    let c = loop {
        let c = converged_modes(shaft, BeamTheory::Timoshenko, count, &[])?;
        let top = c.modes.last().map_or(0.0, |m| m.frequency_hz);
        if top > hi || count >= 64 {
            break c;
        }
        count *= 2;
    };
    let flexible: Vec<&super::beam::BeamMode> = c.modes.iter().filter(|m| !m.rigid_body).collect();
    let mut modes = Vec::new();
    let mut shapes: Vec<(Vec<f64>, Vec<f64>)> = Vec::new();
    let mut next_above_hz = None;
    for (k, m) in flexible.iter().enumerate() {
        if m.frequency_hz > hi {
            next_above_hz = Some(m.frequency_hz);
            break;
        }
        if m.frequency_hz < lo {
            continue;
        }
        modes.push(PlannedMode {
            number: k + 1,
            frequency_hz: m.frequency_hz,
            nodes_m: zero_crossings(&c.nodes_m, &m.displacement),
        });
        shapes.push((c.nodes_m.clone(), m.displacement.clone()));
    }
    let mut warnings = Vec::new();
    if modes.is_empty() {
        warnings.push(format!(
            "the model has no bending mode between {lo} and {hi} Hz{}",
            next_above_hz.map_or(String::new(), |f| format!(" (the next is at {f:.1} Hz)"))
        ));
    }
    // Reference: avoid the nodes; prefer where the weakest mode is strongest.
    let avoid_m: Vec<[f64; 2]> = {
        let d = o.node_fraction * length;
        let mut z: Vec<[f64; 2]> = modes
            .iter()
            .flat_map(|m| {
                m.nodes_m
                    .iter()
                    .map(|&x| [(x - d).max(0.0), (x + d).min(length)])
            })
            .collect();
        z.sort_by(|a, b| a[0].total_cmp(&b[0]));
        let mut merged: Vec<[f64; 2]> = Vec::new();
        for r in z {
            match merged.last_mut() {
                Some(last) if r[0] <= last[1] => last[1] = last[1].max(r[1]),
                _ => merged.push(r),
            }
        }
        merged
    };
    let mut allowed_m = Vec::new();
    let mut from = 0.0;
    for r in &avoid_m {
        if r[0] > from {
            allowed_m.push([from, r[0]]);
        }
        from = r[1];
    }
    if from < length {
        allowed_m.push([from, length]);
    }
    let probe = grid(length, 401);
    let score: Vec<f64> = probe
        .iter()
        .map(|&x| {
            shapes
                .iter()
                .map(|(n, v)| {
                    let full = v.iter().fold(0.0f64, |a, y| a.max(y.abs()));
                    interpolate(n, v, x).abs() / full
                })
                .fold(1.0f64, f64::min)
        })
        .collect();
    let mut best_m = Vec::new();
    let mut best_score = Vec::new();
    let mut order: Vec<usize> = (0..probe.len()).collect();
    order.sort_by(|&a, &b| score[b].total_cmp(&score[a]));
    for i in order {
        if best_m.len() >= 3 {
            break;
        }
        if best_m
            .iter()
            .all(|&x: &f64| (x - probe[i]).abs() > 0.1 * length)
            && !avoid_m.iter().any(|r| probe[i] > r[0] && probe[i] < r[1])
        {
            best_m.push(probe[i]);
            best_score.push(score[i]);
        }
    }
    // Stations.
    // The shortest lobe between two neighbouring nodes (an end's lobe holds the end station).
    let min_gap = modes
        .iter()
        .flat_map(|m| {
            m.nodes_m
                .windows(2)
                .map(|w| w[1] - w[0])
                .filter(|g| *g > 1e-6 * length)
                .collect::<Vec<f64>>()
        })
        .fold(length, f64::min);
    let mut minimum_count = None;
    let mut recommended_count = None;
    for n in 3..=MAX_STATIONS {
        let at = grid(length, n);
        let (_, worst, reach) = grid_quality(&shapes, &at);
        let ok = worst < 0.5 && reach >= 0.7;
        if ok && minimum_count.is_none() {
            minimum_count = Some(n);
        }
        // An interval of length g holds at least ⌊g/s⌋ points of a grid of spacing s: two
        // stations on every lobe needs s ≤ g/2.
        let spacing = length / (n - 1) as f64;
        if ok && spacing <= min_gap / 2.0 {
            recommended_count = Some(n);
            break;
        }
    }
    let minimum_count = minimum_count.unwrap_or(MAX_STATIONS);
    let recommended_count = recommended_count.unwrap_or(MAX_STATIONS);
    let count = o.stations.unwrap_or(recommended_count);
    let positions_m = grid(length, count);
    let (auto_mac, max_off, reach) = grid_quality(&shapes, &positions_m);
    if o.stations.is_some() {
        if count < minimum_count || max_off >= 0.5 {
            warnings.push(format!(
                "{count} stations cannot tell the in-band modes apart (auto-MAC up to {max_off:.2}, \
                 or a mode's peak missed): use at least {minimum_count}, better {recommended_count}"
            ));
        } else if count < recommended_count {
            warnings.push(format!(
                "{count} stations separate the modes but draw the highest one coarsely: \
                 {recommended_count} put two stations between its nodes"
            ));
        }
        if reach < 0.7 {
            warnings.push(format!(
                "on {count} stations a mode's largest sampled amplitude is only {:.0} % of its \
                 largest: stations sit near its nodes",
                100.0 * reach
            ));
        }
    }
    let suspension_m = if free_free {
        flexible
            .first()
            .map(|m| zero_crossings(&c.nodes_m, &m.displacement))
            .unwrap_or_default()
    } else {
        Vec::new()
    };
    let hammer = HammerPlan {
        max_contact_s_10db: 1.02 / hi,
        max_contact_s_20db: 1.30 / hi,
        null_at_band_top_s: 1.5 / hi,
        advice: tip_advice(1.02 / hi),
    };
    let f_min = modes.first().map_or(lo.max(1.0), |m| m.frequency_hz);
    let z = o.damping_ratio;
    let decay_s = 6.0 / (z * 2.0 * std::f64::consts::PI * f_min);
    let resolution_s = 5.0 / (2.0 * z * f_min);
    let length_s = decay_s.max(resolution_s);
    let samples = smooth_at_least((length_s * o.sample_rate_hz).ceil() as usize);
    let record = RecordPlan {
        decay_s,
        resolution_s,
        length_s,
        samples,
        tap_spacing_s: 1.1 * samples as f64 / o.sample_rate_hz,
    };
    if record.length_s > 30.0 {
        warnings.push(format!(
            "at ζ = {z} the lowest mode ({f_min:.1} Hz) rings for {:.0} s: records that long \
             are slow to take; record all the taps of a station in one file and let the analysis \
             use every force (Y = H·X over the whole recording)",
            record.length_s
        ));
    }
    if let Some(f) = next_above_hz
        && f < 1.3 * hi
    {
        warnings.push(format!(
            "the next mode ({f:.1} Hz) lies just above the band: a hard tip excites it too; \
             widen the band to include it or use the softest tip that reaches {hi} Hz"
        ));
    }
    Ok(TestPlan {
        length_m: length,
        free_free,
        band_hz: [lo, hi],
        modes,
        next_above_hz,
        reference: ReferencePlan {
            avoid_m,
            allowed_m,
            best_m,
            best_score,
        },
        stations: StationPlan {
            count,
            positions_m,
            auto_mac,
            max_off_diagonal_mac: max_off,
            minimum_count,
            recommended_count,
            given: o.stations.is_some(),
        },
        suspension_m,
        hammer,
        record,
        warnings,
    })
}

/// The tip in words for a contact time (common practice, from memory: metal tips give contact
/// times of a few tenths of a millisecond on steel, plastic about a millisecond, rubber several;
/// the hammer's mass and the surface change them, so a trial hit measures it).
fn tip_advice(max_contact_s: f64) -> String {
    let ms = 1e3 * max_contact_s;
    let tip = if ms < 0.25 {
        "a metal tip, a light hammer"
    } else if ms < 0.8 {
        "a metal or hard plastic tip"
    } else if ms < 2.5 {
        "a plastic tip"
    } else {
        "a soft (rubber) tip"
    };
    format!(
        "{tip}: the pulse must last at most {ms:.2} ms on this part (measure it on a trial \
         hit); a harder tip than needed excites modes above the band"
    )
}

/// The plan as text for a person.
pub fn plan_text(p: &TestPlan) -> String {
    use std::fmt::Write as _;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "Test plan: {:.3} m part, {}, band {}–{} Hz",
        p.length_m,
        if p.free_free {
            "free-free"
        } else {
            "on its supports"
        },
        p.band_hz[0],
        p.band_hz[1]
    );
    let _ = writeln!(s, "\nModes expected in the band (bending, each plane):");
    for m in &p.modes {
        let nodes: Vec<String> = m.nodes_m.iter().map(|x| format!("{x:.3}")).collect();
        let _ = writeln!(
            s,
            "  mode {:2}  {:9.1} Hz  nodes at {} m",
            m.number,
            m.frequency_hz,
            nodes.join(", ")
        );
    }
    if let Some(f) = p.next_above_hz {
        let _ = writeln!(s, "  (next above the band: {f:.1} Hz)");
    }
    let _ = writeln!(s, "\nReference accelerometer:");
    let best: Vec<String> = p
        .reference
        .best_m
        .iter()
        .zip(&p.reference.best_score)
        .map(|(x, q)| format!("{x:.3} m ({:.0} %)", 100.0 * q))
        .collect();
    let _ = writeln!(
        s,
        "  best at {} (the weakest in-band mode's share of its peak)",
        best.join(", ")
    );
    let allowed: Vec<String> = p
        .reference
        .allowed_m
        .iter()
        .map(|r| format!("{:.3}–{:.3}", r[0], r[1]))
        .collect();
    if !p.reference.avoid_m.is_empty() {
        let _ = writeln!(
            s,
            "  only within {} m (elsewhere it sits near a node of an in-band mode)",
            allowed.join(", ")
        );
    }
    let st = &p.stations;
    let _ = writeln!(
        s,
        "\nStations: {} evenly spaced ({}), {:.3} m apart; auto-MAC off the diagonal at most \
         {:.3}\n  at least {} to keep the modes apart, {} to draw every shape between its nodes",
        st.count,
        if st.given { "as given" } else { "recommended" },
        if st.count > 1 {
            p.length_m / (st.count - 1) as f64
        } else {
            0.0
        },
        st.max_off_diagonal_mac,
        st.minimum_count,
        st.recommended_count
    );
    if !p.suspension_m.is_empty() {
        let at: Vec<String> = p.suspension_m.iter().map(|x| format!("{x:.3}")).collect();
        let _ = writeln!(
            s,
            "\nSuspension: soft cords or foam at {} m (the first mode's nodes)",
            at.join(" and ")
        );
    }
    let h = &p.hammer;
    let _ = writeln!(
        s,
        "\nHammer: contact at most {:.2} ms for −10 dB at {} Hz ({:.2} ms for −20 dB; {:.2} ms \
         puts the spectrum's first null at the band's top)\n  {}",
        1e3 * h.max_contact_s_10db,
        p.band_hz[1],
        1e3 * h.max_contact_s_20db,
        1e3 * h.null_at_band_top_s,
        h.advice
    );
    let r = &p.record;
    let _ = writeln!(
        s,
        "\nRecord: at least {:.2} s ({:.2} s for the ringing to die away, {:.2} s for five lines \
         in the half-power band) = {} samples; taps at least {:.1} s apart",
        r.length_s, r.decay_s, r.resolution_s, r.samples, r.tap_spacing_s
    );
    for w in &p.warnings {
        let _ = writeln!(s, "\nwarning: {w}");
    }
    s
}
