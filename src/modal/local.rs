//! Narrow-band checks of the whole-band fit: local diagrams that split poles standing for two
//! close modes and find modes a wide band missed.

use super::peak::prominent_peaks;
use super::*;

/// The pole columns of a stabilization diagram over a narrow band around `f` (±15 % or ±40
/// lines): poles present at a steady frequency (within 0.3 %) through at least 60 % of the upper
/// half of the orders, with their damping spread within ±25 % and passing `physical`. Noise and
/// a nearby hum line make the damping jitter between orders at the low end of a wide band, so
/// frequency stability is what is asked; the local refinement then settles the damping against
/// the data. Each column is returned as its median pole with the number of orders it stood for,
/// by frequency.
///
/// Where a column near `f` sits close to one of those limits (the weaker member of a close pair
/// often does), one diagram's verdict hinges on the last digits of the data: two more diagrams,
/// over bands 2 % of `f` narrower and wider, vote, and the number of columns near `f` that most
/// of the three find decides.
pub(super) fn local_columns(
    set: &FrfSet,
    w_all: &[Vec<f64>],
    f: f64,
    s: &ModalSettings,
    physical: &(dyn Fn(&Pole) -> bool + Sync),
) -> Vec<(Pole, usize)> {
    let first = local_diagram(set, w_all, f, 0.15, s, physical);
    if !first.borderline {
        return first.columns;
    }
    let near = |c: &[(Pole, usize)]| {
        c.iter()
            .filter(|c| (c.0.frequency_hz / f - 1.0).abs() < 0.015)
            .count()
    };
    let others = [0.13, 0.17].map(|h| local_diagram(set, w_all, f, h, s, physical));
    let (n0, n1, n2) = (
        near(&first.columns),
        near(&others[0].columns),
        near(&others[1].columns),
    );
    if n1 == n2 && n1 != n0 {
        let [a, _] = others;
        a.columns
    } else {
        first.columns
    }
}

/// One narrow-band diagram's columns, and whether a column near its centre sat near a limit.
struct LocalDiagram {
    columns: Vec<(Pole, usize)>,
    borderline: bool,
}

/// [`local_columns`] over ±`half_fraction`·`f` (or ±40 lines).
fn local_diagram(
    set: &FrfSet,
    w_all: &[Vec<f64>],
    f: f64,
    half_fraction: f64,
    s: &ModalSettings,
    physical: &(dyn Fn(&Pole) -> bool + Sync),
) -> LocalDiagram {
    let mut borderline = false;
    let half = (half_fraction * f).max(40.0 * set.df_hz);
    let k0 = set.freq_hz.partition_point(|&x| x < f - half);
    let k1 = set.freq_hz.partition_point(|&x| x <= f + half);
    let none = LocalDiagram {
        columns: Vec::new(),
        borderline: false,
    };
    if k1 < k0 + 24 {
        return none;
    }
    let h: Vec<Vec<Complex64>> = set.h.iter().map(|v| v[k0..k1].to_vec()).collect();
    let w: Vec<Vec<f64>> = w_all.iter().map(|v| v[k0..k1].to_vec()).collect();
    let order = 32.min((k1 - k0 - 2) / 2);
    let Ok(local) = lscf::stabilization(&set.freq_hz[k0..k1], &h, &w, order, s.criteria) else {
        return none;
    };
    let mut upper: Vec<&Pole> = local
        .poles
        .iter()
        .filter(|p| {
            p.status >= PoleStatus::Frequency
                && 2 * p.order >= local.max_order
                && (p.frequency_hz / f - 1.0).abs() < 0.02
        })
        .collect();
    upper.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    let orders_upper = local.max_order - local.max_order.div_ceil(2) + 1;
    let mut out = Vec::new();
    let mut start = 0;
    while start < upper.len() {
        let mut end = start + 1;
        while end < upper.len()
            && upper[end].frequency_hz / upper[end - 1].frequency_hz - 1.0 < 0.001
        {
            end += 1;
        }
        let mut column: Vec<&Pole> = upper[start..end].to_vec();
        start = end;
        // A broad pole that strays into the column (noise) is dropped by its damping; then one
        // pole per order, the one nearest the column's median damping.
        column.sort_by(|a, b| a.damping_ratio.total_cmp(&b.damping_ratio));
        let med = column[column.len() / 2].damping_ratio;
        column.retain(|p| p.damping_ratio > 0.5 * med && p.damping_ratio < 2.0 * med);
        column.sort_by(|a, b| {
            a.order.cmp(&b.order).then(
                (a.damping_ratio - med)
                    .abs()
                    .total_cmp(&(b.damping_ratio - med).abs()),
            )
        });
        column.dedup_by_key(|p| p.order);
        if column.is_empty() {
            continue;
        }
        let share = column.len() as f64 / orders_upper as f64;
        column.sort_by(|a, b| a.damping_ratio.total_cmp(&b.damping_ratio));
        let mid = column[column.len() / 2].damping_ratio;
        let (q1, q3) = (
            column[column.len() / 4].damping_ratio / mid,
            column[3 * column.len() / 4].damping_ratio / mid,
        );
        // Near a limit: within about a fifth of it (a column of 0.45–0.75 of the orders, or
        // damping quartiles 0.65–0.85 or 1.12–1.4 of the median).
        if (column[0].frequency_hz / f - 1.0).abs() < 0.015
            && share >= 0.45
            && ((0.45..=0.75).contains(&share)
                || (0.65..=0.85).contains(&q1)
                || (1.12..=1.4).contains(&q3))
        {
            borderline = true;
        }
        if 5 * column.len() < 3 * orders_upper || !(q1 > 0.75 && q3 < 1.25) {
            continue;
        }
        let pick = column[column.len() / 2].clone();
        if physical(&pick) {
            out.push((pick, column.len()));
        }
    }
    out.sort_by(|a, b| a.0.frequency_hz.total_cmp(&b.0.frequency_hz));
    LocalDiagram {
        columns: out,
        borderline,
    }
}

/// Poles for prominent resonances of the Σ|H| indicator that no chosen pole explains, each from
/// a stabilization diagram over a narrow band around its peak. A band spanning decades leaves the
/// global z-domain fit ill-conditioned at its low end (poles crowd near z = 1), where a narrow
/// band resolves them; the same stability and physical checks apply, so a noise peak does not
/// pass. Returns each pole with the number of orders its column stood for.
pub(super) fn local_poles(
    set: &FrfSet,
    ind: &Indicators,
    stab: &Stabilization,
    chosen: &[(usize, usize)],
    w: &[Vec<f64>],
    s: &ModalSettings,
    physical: &(dyn Fn(&Pole) -> bool + Sync),
) -> Vec<(Pole, usize)> {
    let mut out: Vec<(Pole, usize)> = Vec::new();
    if set.layout != Layout::Hammer || set.freq_hz.len() < 64 {
        return out;
    }
    let y = &ind.sum_abs;
    let near = |f: f64, g: f64| (g - f).abs() <= (0.01 * f).max(3.0 * set.df_hz);
    // Peaks no chosen pole explains that stand out as resonances; their local diagrams are
    // independent and run on all cores.
    let peaks: Vec<f64> = prominent_peaks(y)
        .into_iter()
        .filter_map(|k| {
            let f = set.freq_hz[k];
            if chosen.iter().any(|c| near(f, stab.poles[c.0].frequency_hz)) {
                return None;
            }
            // A resonance stands at least 6 dB above the lowest point within ±10 % on each side.
            let span = ((0.1 * f / set.df_hz) as usize).max(4);
            let left = y[k.saturating_sub(span)..k]
                .iter()
                .fold(f64::INFINITY, |m, &v| m.min(v));
            let right = y[k + 1..(k + span + 1).min(y.len())]
                .iter()
                .fold(f64::INFINITY, |m, &v| m.min(v));
            (left.is_finite() && right.is_finite() && y[k] >= 2.0 * left.max(right)).then_some(f)
        })
        .collect();
    // A band of ±15 % around each peak: its cost grows with the frequency.
    let columns = crate::numeric::par_map_dearest_first(
        &peaks,
        |&f| f,
        |&f| local_columns(set, w, f, s, physical),
    );
    for (&f, cols) in peaks.iter().zip(columns) {
        if out.iter().any(|p| near(f, p.0.frequency_hz)) {
            continue;
        }
        if let Some(best) = cols
            .into_iter()
            .filter(|c| (c.0.frequency_hz / f - 1.0).abs() < 0.01)
            .min_by(|a, b| {
                (a.0.frequency_hz - f)
                    .abs()
                    .total_cmp(&(b.0.frequency_hz - f).abs())
            })
        {
            out.push(best);
        }
    }
    out
}
