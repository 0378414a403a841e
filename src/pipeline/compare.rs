//! Two tests of a part (before and after a repair) or of two nominally identical parts, side
//! by side: their modes paired by MAC with the frequency and damping changes, and their FRFs
//! station by station. Tests on different station grids are compared by position: the second
//! test's shapes are read at the first's positions (linear interpolation, inside its span).

use serde::Serialize;

use crate::Complex64;
use crate::estimate::shape::mac;
use crate::modal::{FrfSet, ModalResult};

/// A mode of the first test paired with one of the second.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ModePair {
    /// Index of the mode in the first test.
    pub a: usize,
    /// Index in the second.
    pub b: usize,
    /// Frequency in the first, Hz.
    pub a_hz: f64,
    /// Frequency in the second, Hz.
    pub b_hz: f64,
    /// (second − first)/first, %.
    pub difference_pct: f64,
    /// Damping ratio in the first.
    pub a_damping: Option<f64>,
    /// Damping ratio in the second.
    pub b_damping: Option<f64>,
    /// (second − first)/first damping, %.
    pub damping_change_pct: Option<f64>,
    /// MAC of the shapes at the common positions.
    pub mac: f64,
}

/// A station of the first test matched by position with one of the second.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct StationPair {
    /// Station in the first test.
    pub a_station: u32,
    /// Station in the second.
    pub b_station: u32,
    /// Position, m (the first test's).
    pub position_m: f64,
    /// Median |20 log10(|H_b|/|H_a|)| over lines coherent in both, dB.
    pub median_db: Option<f64>,
}

/// The comparison.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Comparison {
    /// Mode pairs, by the first test's mode.
    pub pairs: Vec<ModePair>,
    /// Modes of the first test with no partner.
    pub unpaired_a: Vec<usize>,
    /// Modes of the second test with no partner.
    pub unpaired_b: Vec<usize>,
    /// MAC[first][second] at the common positions.
    pub mac: Vec<Vec<f64>>,
    /// The first test's positions the comparison of shapes uses, m.
    pub positions_m: Vec<f64>,
    /// Stations matched by position.
    pub stations: Vec<StationPair>,
    /// What a person should know.
    pub warnings: Vec<String>,
}

/// `shape` (given at `xs`, ascending or not) read at `x` by linear interpolation; `None` outside
/// the span.
fn shape_at(xs: &[f64], shape: &[Complex64], x: f64) -> Option<Complex64> {
    let mut idx: Vec<usize> = (0..xs.len()).collect();
    idx.sort_by(|&i, &j| xs[i].total_cmp(&xs[j]));
    let tol = 1e-9 * (1.0 + x.abs());
    let first = *idx.first()?;
    let last = *idx.last()?;
    if x < xs[first] - tol || x > xs[last] + tol {
        return None;
    }
    for w in idx.windows(2) {
        let (i, j) = (w[0], w[1]);
        if x >= xs[i] - tol && x <= xs[j] + tol {
            let span = xs[j] - xs[i];
            let t = if span > 0.0 {
                ((x - xs[i]) / span).clamp(0.0, 1.0)
            } else {
                0.0
            };
            return Some(shape[i] * (1.0 - t) + shape[j] * t);
        }
    }
    Some(shape[first])
}

/// Compares test `a` with test `b`; modes pair when their MAC is at least `min_mac` and their
/// frequencies lie within 25 % (greedy, highest MAC first, each mode used once).
pub fn compare(
    a_set: &FrfSet,
    a: &ModalResult,
    b_set: &FrfSet,
    b: &ModalResult,
    min_mac: f64,
) -> Comparison {
    let mut warnings = Vec::new();
    // The first test's positions that the second test's span covers.
    let keep: Vec<usize> = (0..a.positions_m.len())
        .filter(|&i| {
            b.modes
                .first()
                .is_none_or(|m| shape_at(&b.positions_m, &m.shape, a.positions_m[i]).is_some())
        })
        .collect();
    if keep.len() < a.positions_m.len() {
        warnings.push(format!(
            "{} of the first test's stations lie outside the second's span and are left out of \
             the shapes' comparison",
            a.positions_m.len() - keep.len()
        ));
    }
    let positions_m: Vec<f64> = keep.iter().map(|&i| a.positions_m[i]).collect();
    let a_shapes: Vec<Vec<Complex64>> = a
        .modes
        .iter()
        .map(|m| keep.iter().map(|&i| m.shape[i]).collect())
        .collect();
    let b_shapes: Vec<Vec<Complex64>> = b
        .modes
        .iter()
        .map(|m| {
            positions_m
                .iter()
                .map(|&x| shape_at(&b.positions_m, &m.shape, x).unwrap_or_default())
                .collect()
        })
        .collect();
    let macs: Vec<Vec<f64>> = a_shapes
        .iter()
        .map(|s| b_shapes.iter().map(|t| mac(s, t)).collect())
        .collect();
    let mut cands = Vec::new();
    for (i, row) in macs.iter().enumerate() {
        for (j, &v) in row.iter().enumerate() {
            let (fa, fb) = (a.modes[i].frequency_hz, b.modes[j].frequency_hz);
            if v >= min_mac && (fb - fa).abs() <= 0.25 * fa {
                cands.push((v, i, j));
            }
        }
    }
    cands.sort_by(|x, y| y.0.total_cmp(&x.0));
    let (mut ua, mut ub) = (vec![false; a.modes.len()], vec![false; b.modes.len()]);
    let mut pairs = Vec::new();
    for (v, i, j) in cands {
        if ua[i] || ub[j] {
            continue;
        }
        ua[i] = true;
        ub[j] = true;
        let (ma, mb) = (&a.modes[i], &b.modes[j]);
        pairs.push(ModePair {
            a: i,
            b: j,
            a_hz: ma.frequency_hz,
            b_hz: mb.frequency_hz,
            difference_pct: 100.0 * (mb.frequency_hz - ma.frequency_hz) / ma.frequency_hz,
            a_damping: ma.damping_ratio,
            b_damping: mb.damping_ratio,
            damping_change_pct: ma
                .damping_ratio
                .zip(mb.damping_ratio)
                .filter(|(x, _)| *x > 0.0)
                .map(|(x, y)| 100.0 * (y - x) / x),
            mac: v,
        });
    }
    pairs.sort_by_key(|p| p.a);
    // Stations by position: within 2 % of the first test's span.
    let span = a_set
        .positions_m
        .iter()
        .fold(0.0f64, |m, &x| m.max(x))
        .max(1e-9);
    let mut stations = Vec::new();
    for (i, (&sa, &xa)) in a_set.stations.iter().zip(&a_set.positions_m).enumerate() {
        let Some(j) = (0..b_set.stations.len())
            .filter(|&j| (b_set.positions_m[j] - xa).abs() <= 0.02 * span)
            .min_by(|&p, &q| {
                (b_set.positions_m[p] - xa)
                    .abs()
                    .total_cmp(&(b_set.positions_m[q] - xa).abs())
            })
        else {
            continue;
        };
        let mut d: Vec<f64> = a_set
            .freq_hz
            .iter()
            .enumerate()
            .filter(|&(k, _)| a_set.coherence[i][k] >= 0.9)
            .filter_map(|(k, &f)| {
                let l = crate::numeric::nearest_index(&b_set.freq_hz, f);
                let close = (b_set.freq_hz[l] - f).abs() <= 0.51 * a_set.df_hz.max(b_set.df_hz);
                let (x, y) = (a_set.h[i][k].norm(), b_set.h[j][l].norm());
                (close && b_set.coherence[j][l] >= 0.9 && x > 0.0 && y > 0.0)
                    .then(|| (20.0 * (y / x).log10()).abs())
            })
            .collect();
        d.sort_by(f64::total_cmp);
        stations.push(StationPair {
            a_station: sa,
            b_station: b_set.stations[j],
            position_m: xa,
            median_db: (!d.is_empty()).then(|| d[d.len() / 2]),
        });
    }
    if stations.is_empty() {
        warnings.push("no station of one test lies at a station of the other".into());
    }
    if a_set.layout != b_set.layout {
        warnings.push(
            "the tests have different layouts (roving hammer and roving sensor): their FRFs are \
             different quantities"
                .into(),
        );
    }
    Comparison {
        unpaired_a: (0..a.modes.len()).filter(|&i| !ua[i]).collect(),
        unpaired_b: (0..b.modes.len()).filter(|&j| !ub[j]).collect(),
        pairs,
        mac: macs,
        positions_m,
        stations,
        warnings,
    }
}

/// The comparison as text.
pub fn compare_text(c: &Comparison) -> String {
    use std::fmt::Write as _;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "mode  first (Hz)  second (Hz)   Δf (%)   ζ first (%)  ζ second (%)   Δζ (%)    MAC"
    );
    let pct = |v: Option<f64>| v.map_or("—".to_string(), |z| format!("{:.3}", 100.0 * z));
    for p in &c.pairs {
        let _ = writeln!(
            s,
            "{:4}  {:10.2}  {:11.2}  {:+7.3}  {:>11}  {:>12}  {:>7}  {:.3}",
            p.a + 1,
            p.a_hz,
            p.b_hz,
            p.difference_pct,
            pct(p.a_damping),
            pct(p.b_damping),
            p.damping_change_pct
                .map_or("—".to_string(), |d| format!("{d:+.0}")),
            p.mac
        );
    }
    if !c.unpaired_a.is_empty() || !c.unpaired_b.is_empty() {
        let _ = writeln!(
            s,
            "unpaired: first test's modes {:?}, second test's modes {:?} (1-based)",
            c.unpaired_a.iter().map(|i| i + 1).collect::<Vec<_>>(),
            c.unpaired_b.iter().map(|i| i + 1).collect::<Vec<_>>()
        );
    }
    let _ = writeln!(
        s,
        "FRFs station by station (median difference, coherent lines):"
    );
    for st in &c.stations {
        let _ = writeln!(
            s,
            "  station {} / {} at {:.3} m: {}",
            st.a_station,
            st.b_station,
            st.position_m,
            st.median_db
                .map_or("no coherent line in both".to_string(), |d| format!(
                    "{d:.2} dB"
                ))
        );
    }
    for w in &c.warnings {
        let _ = writeln!(s, "warning: {w}");
    }
    s
}
