//! The rotor over a speed range: damped modes tracked from speed to speed (Campbell diagram),
//! critical speeds where a whirl frequency meets 1× or 2× running speed, and the stability
//! threshold where a logarithmic decrement first crosses zero (rotor-notes §A4).

use serde::Serialize;

use super::eigen::{Basis, DampedMode, Whirl, complex_mac, damped_modes};
use super::model::{NODE_DOFS, RotorModel};

/// Whirl frequencies below this are rigid-body motion of an unsupported rotor, not modes, Hz.
pub const MIN_MODE_HZ: f64 = 0.05;

/// Log decrements above −this count as stable: an undamped (conservative) rotor's are zero to
/// round-off, not negative.
pub const NEUTRAL_LOG_DEC: f64 = 1e-6;

/// Computes damped modes at any speed, reusing the reduction basis while the bearings' direct
/// stiffness stays within 25 % of the one it was built for.
pub struct Solver<'a> {
    model: &'a RotorModel,
    keep: usize,
    cached: Option<(Vec<f64>, Basis)>,
}

/// Models with at most this many DOFs are solved on the whole space (exact, and still fast).
pub const FULL_BASIS_DOFS: usize = 96;

impl<'a> Solver<'a> {
    /// A solver keeping 2·`wanted_modes` + 16 basis modes, at least 32 (all of them on small
    /// models).
    pub fn new(model: &'a RotorModel, wanted_modes: usize) -> Self {
        Self::with_basis(model, (2 * wanted_modes + 16).max(32))
    }

    /// A solver keeping `keep` basis modes (`usize::MAX`: all, exact).
    pub fn with_basis(model: &'a RotorModel, keep: usize) -> Self {
        Self {
            model,
            keep,
            cached: None,
        }
    }

    fn basis(&mut self, speed_rpm: f64) -> Result<&Basis, String> {
        let n = self.model.dofs();
        // Each bearing's direct stiffness in x and in y (negative values, which a film does not
        // have, are left out: the basis must come from a positive semi-definite stiffness).
        let direct: Vec<f64> = self
            .model
            .bearing_coefficients(speed_rpm)?
            .iter()
            .flat_map(|c| [c.k_n_per_m[0][0].max(0.0), c.k_n_per_m[1][1].max(0.0)])
            .collect();
        let stale = match &self.cached {
            None => true,
            Some((d, _)) => d
                .iter()
                .zip(&direct)
                .any(|(a, b)| (a - b).abs() > 0.25 * a.abs().max(b.abs())),
        };
        if stale {
            // Small models keep every mode: the change to modal coordinates is then exact.
            let keep = if n <= FULL_BASIS_DOFS {
                n
            } else {
                self.keep.min(n)
            };
            let mut k = self.model.k.clone();
            for (kb, &node) in direct.chunks(2).zip(&self.model.bearing_nodes) {
                for d in 0..2 {
                    k[(NODE_DOFS * node + d, NODE_DOFS * node + d)] += kb[d];
                }
            }
            let k = (&k + k.transpose()) * 0.5;
            let attach: Vec<usize> = self
                .model
                .bearing_nodes
                .iter()
                .flat_map(|&b| [NODE_DOFS * b, NODE_DOFS * b + 1])
                .collect();
            let basis = Basis::lowest(&k, &self.model.m, keep, &attach)?;
            self.cached = Some((direct, basis));
        }
        Ok(&self.cached.as_ref().expect("just filled").1)
    }

    /// The lowest `count` whirl modes at `speed_rpm`.
    pub fn modes_at(&mut self, speed_rpm: f64, count: usize) -> Result<Vec<DampedMode>, String> {
        // The model is borrowed for 'a, not from `self`: no copy of its matrices or the basis.
        let model = self.model;
        let (k, c) = model.at_speed(speed_rpm)?;
        let basis = self.basis(speed_rpm)?;
        let span = model.nodes_m.last().copied().unwrap_or(0.0)
            - model.nodes_m.first().copied().unwrap_or(0.0);
        damped_modes(&model.m, &c, &k, basis, count, MIN_MODE_HZ, Some(span))
    }
}

/// One mode at one speed on the Campbell diagram.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CampbellPoint {
    /// Spin speed, rpm.
    pub speed_rpm: f64,
    /// Damped natural frequency, Hz.
    pub frequency_hz: f64,
    /// Damping ratio (negative: unstable).
    pub damping_ratio: f64,
    /// Logarithmic decrement (negative: unstable).
    pub log_dec: f64,
    /// Whirl direction.
    pub whirl: Whirl,
    /// The tracked branch (mode) this point belongs to, 1-based, numbered by frequency at the
    /// lowest speed.
    pub mode: usize,
}

/// A speed where a whirl frequency equals an order of the running speed.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CriticalSpeed {
    /// Speed, rpm.
    pub speed_rpm: f64,
    /// Whirl direction of the mode there.
    pub whirl: Whirl,
    /// Order of running speed (1 or 2).
    pub order: u32,
    /// The mode's frequency there, Hz.
    pub frequency_hz: f64,
    /// Its damping ratio there.
    pub damping_ratio: f64,
    /// Its logarithmic decrement there.
    pub log_dec: f64,
    /// Tracked branch, 1-based.
    pub mode: usize,
}

/// The Campbell diagram and what is read from it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Campbell {
    /// Every tracked mode at every speed.
    pub points: Vec<CampbellPoint>,
    /// Critical speeds (1× and 2×), ascending.
    pub critical_speeds: Vec<CriticalSpeed>,
    /// The lowest speed in the range at which a mode's log decrement reaches zero.
    pub stability_threshold_rpm: Option<f64>,
    /// Frequency of the mode that goes unstable there, Hz.
    pub threshold_frequency_hz: Option<f64>,
    /// Each tracked branch's mode at each speed (shapes for whirl orbits).
    #[serde(skip)]
    pub modes: Vec<Vec<DampedMode>>,
}

/// Speeds `lo..=hi` in `count` equal steps.
pub fn speed_grid(lo: f64, hi: f64, count: usize) -> Vec<f64> {
    let count = count.max(2);
    (0..count)
        .map(|i| lo + (hi - lo) * i as f64 / (count - 1) as f64)
        .collect()
}

/// Tracks `count` modes over `speeds_rpm` (ascending) and reads the critical speeds and the
/// stability threshold.
pub fn campbell(model: &RotorModel, speeds_rpm: &[f64], count: usize) -> Result<Campbell, String> {
    if speeds_rpm.is_empty() || count == 0 {
        return Err("no speeds or no modes asked for".into());
    }
    let mut solver = Solver::new(model, count + 4);
    // Branch b's mode at each speed.
    let mut branches: Vec<Vec<DampedMode>> = Vec::new();
    let mut unstable_at: Option<usize> = None;
    for (si, &rpm) in speeds_rpm.iter().enumerate() {
        let modes = solver
            .modes_at(rpm, count + 4)
            .map_err(|e| format!("at {rpm:.0} rpm: {e}"))?;
        if unstable_at.is_none() && modes.iter().any(|m| m.log_dec < -NEUTRAL_LOG_DEC) {
            unstable_at = Some(si);
        }
        if si == 0 {
            branches = modes.into_iter().take(count).map(|m| vec![m]).collect();
            continue;
        }
        let assigned = assign(
            &branches
                .iter()
                .map(|b| b.last().expect("one per speed"))
                .collect::<Vec<_>>(),
            &modes,
        );
        for (b, pick) in branches.iter_mut().zip(assigned) {
            let m = match pick {
                Some(j) => modes[j].clone(),
                // Fewer modes than branches (a mode left the band): hold the last one so the
                // tables stay aligned; it is marked by an unchanged frequency.
                None => b.last().expect("one per speed").clone(),
            };
            b.push(m);
        }
    }
    let mut points = Vec::new();
    for (si, &rpm) in speeds_rpm.iter().enumerate() {
        for (b, modes) in branches.iter().enumerate() {
            let m = &modes[si];
            // At rest the whirl direction of an isotropic pair is arbitrary: take the branch's
            // direction at the next speed.
            let whirl = if rpm == 0.0 && si + 1 < speeds_rpm.len() {
                modes[si + 1].whirl
            } else {
                m.whirl
            };
            points.push(CampbellPoint {
                speed_rpm: rpm,
                frequency_hz: m.frequency_hz,
                damping_ratio: m.damping_ratio,
                log_dec: m.log_dec,
                whirl,
                mode: b + 1,
            });
        }
    }
    let mut critical_speeds = Vec::new();
    for (b, modes) in branches.iter().enumerate() {
        for order in [1u32, 2] {
            let gap = |f_hz: f64, rpm: f64| f_hz * 60.0 - f64::from(order) * rpm;
            for si in 0..speeds_rpm.len().saturating_sub(1) {
                let (g0, g1) = (
                    gap(modes[si].frequency_hz, speeds_rpm[si]),
                    gap(modes[si + 1].frequency_hz, speeds_rpm[si + 1]),
                );
                if g0 > 0.0 && g1 <= 0.0 {
                    let c = refine_critical(
                        &mut solver,
                        [speeds_rpm[si], speeds_rpm[si + 1]],
                        [g0, g1],
                        &modes[si],
                        order,
                        count + 4,
                    )?;
                    critical_speeds.push(CriticalSpeed {
                        speed_rpm: c.0,
                        whirl: c.1.whirl,
                        order,
                        frequency_hz: c.1.frequency_hz,
                        damping_ratio: c.1.damping_ratio,
                        log_dec: c.1.log_dec,
                        mode: b + 1,
                    });
                }
            }
        }
    }
    critical_speeds.sort_by(|a, b| a.speed_rpm.total_cmp(&b.speed_rpm));
    let (stability_threshold_rpm, threshold_frequency_hz) = match unstable_at {
        None => (None, None),
        Some(0) => (Some(speeds_rpm[0]), None),
        Some(i) => {
            let (rpm, f) =
                refine_threshold(&mut solver, [speeds_rpm[i - 1], speeds_rpm[i]], count + 4)?;
            (Some(rpm), f)
        }
    };
    let threshold_frequency_hz = match (stability_threshold_rpm, threshold_frequency_hz) {
        (Some(rpm), None) => solver
            .modes_at(rpm, count + 4)?
            .iter()
            .min_by(|a, b| a.log_dec.total_cmp(&b.log_dec))
            .map(|m| m.frequency_hz),
        (_, f) => f,
    };
    Ok(Campbell {
        points,
        critical_speeds,
        stability_threshold_rpm,
        threshold_frequency_hz,
        modes: branches,
    })
}

/// Which candidate continues each branch: the best shape match (complex MAC), greedily, with
/// the frequency step as a tie-breaker for degenerate pairs.
fn assign(previous: &[&DampedMode], candidates: &[DampedMode]) -> Vec<Option<usize>> {
    let mut scores = Vec::new();
    for (b, p) in previous.iter().enumerate() {
        for (j, c) in candidates.iter().enumerate() {
            let mac = complex_mac(&p.shape, &c.shape);
            let step = (c.frequency_hz - p.frequency_hz).abs() / p.frequency_hz.max(1e-9);
            scores.push((mac - 0.1 * step.min(1.0), b, j));
        }
    }
    scores.sort_by(|a, b| b.0.total_cmp(&a.0));
    let mut out = vec![None; previous.len()];
    let mut used = vec![false; candidates.len()];
    for (_, b, j) in scores {
        if out[b].is_none() && !used[j] {
            out[b] = Some(j);
            used[j] = true;
        }
    }
    out
}

/// The speed between `speeds` where the branch continuing `seed` meets `order`× running speed,
/// by the Illinois variant of regula falsi on f·60 − order·N.
fn refine_critical(
    solver: &mut Solver<'_>,
    speeds: [f64; 2],
    gaps: [f64; 2],
    seed: &DampedMode,
    order: u32,
    count: usize,
) -> Result<(f64, DampedMode), String> {
    let [mut a, mut b] = speeds;
    let [mut ga, mut gb] = gaps;
    let mut last_side = 0i8;
    let mut best = seed.clone();
    let mut best_speed = a;
    for _ in 0..60 {
        let x = if gb != ga {
            b - gb * (b - a) / (gb - ga)
        } else {
            0.5 * (a + b)
        };
        let x = x.clamp(a.min(b), a.max(b));
        let modes = solver.modes_at(x, count)?;
        let Some(m) = modes
            .iter()
            .max_by(|p, q| {
                complex_mac(&seed.shape, &p.shape).total_cmp(&complex_mac(&seed.shape, &q.shape))
            })
            .cloned()
        else {
            break;
        };
        let gx = m.frequency_hz * 60.0 - f64::from(order) * x;
        best = m;
        best_speed = x;
        if gx.abs() <= 1e-9 * x.max(1.0) || (b - a).abs() <= 1e-10 * x.max(1.0) {
            break;
        }
        if gx > 0.0 {
            a = x;
            ga = gx;
            if last_side == 1 {
                gb *= 0.5;
            }
            last_side = 1;
        } else {
            b = x;
            gb = gx;
            if last_side == -1 {
                ga *= 0.5;
            }
            last_side = -1;
        }
    }
    Ok((best_speed, best))
}

/// The speed between `speeds` (stable, unstable) where the least log decrement crosses zero,
/// by bisection to 1e-9 of the speed, and the frequency of that mode.
fn refine_threshold(
    solver: &mut Solver<'_>,
    speeds: [f64; 2],
    count: usize,
) -> Result<(f64, Option<f64>), String> {
    let [mut a, mut b] = speeds;
    let mut freq = None;
    for _ in 0..80 {
        let x = 0.5 * (a + b);
        let modes = solver.modes_at(x, count)?;
        let least = modes.iter().min_by(|p, q| p.log_dec.total_cmp(&q.log_dec));
        if least.is_some_and(|m| m.log_dec < -NEUTRAL_LOG_DEC) {
            b = x;
            freq = least.map(|m| m.frequency_hz);
        } else {
            a = x;
        }
        if (b - a) <= 1e-9 * b.max(1.0) {
            break;
        }
    }
    Ok((b, freq))
}
