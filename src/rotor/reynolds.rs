//! Finite-length plain journal bearing: the Reynolds equation by finite volumes with the
//! Reynolds (Swift–Stieber) cavitation condition, and the eight coefficients by perturbation of
//! the film force (rotor-notes §B4).
//!
//! Dimensionless: H = h/c = 1 − X cos θ − Y sin θ, P = p c²/(μωR²), Z = z/R, τ = ωt, θ from +x
//! toward +y (the spin direction; x along the load, as in [`super::bearing`]).
//! ∂θ(H³∂θP) + ∂Z(H³∂ZP) = 6∂θH + 12∂τH with P = 0 at the bearing ends, P ≥ 0 and the equation
//! holding where P > 0 — a linear complementarity problem solved by a primal–dual active set
//! (Hintermüller, Ito & Kunisch 2002, from memory) with nalgebra-sparse's Cholesky on the free
//! nodes. The film force on the journal is F = −(μωR⁴/c²)∬P(cos θ, sin θ)dθdZ; the coefficients
//! are central differences of it in position and velocity, which include the motion of the
//! cavitation boundary.

use nalgebra_sparse::factorization::CscCholesky;
use nalgebra_sparse::{CooMatrix, CscMatrix};

use super::bearing::{PlainBearing, PlainResult, short_attitude_deg, short_eccentricity};

/// Grid of the film: nodes around the circumference and across the half length (the film is
/// symmetric about the mid-plane).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Grid {
    /// Nodes around.
    pub around: usize,
    /// Nodes from the mid-plane to (not including) the end.
    pub across: usize,
}

impl Default for Grid {
    /// 180 × 20 on the half length (= 180 × 40 on the whole): forces within 1e-4 of a grid
    /// twice as fine around (rotor-notes §B4).
    fn default() -> Self {
        Self {
            around: 180,
            across: 20,
        }
    }
}

/// The bore of a film bearing, dimensionless.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bore {
    /// Length over diameter.
    pub l_over_d: f64,
    /// Two-lobe preload m = 1 − c_b/c_l (0: a plain cylindrical bore).
    pub preload: f64,
    /// Width of each of the two axial grooves at the horizontal split, radians (0: none).
    pub groove_rad: f64,
}

impl Bore {
    /// A plain cylindrical bore, no grooves.
    pub fn plain(l_over_d: f64) -> Self {
        Self {
            l_over_d,
            preload: 0.0,
            groove_rad: 0.0,
        }
    }

    /// Dimensionless film thickness at angle θ (from the load line, +x) for journal position
    /// (X, Y): H = 1 − X cos θ − Y sin θ − m|cos θ| (two lobes, their centres moved ±m along
    /// the load line; rotor-notes §B5 in this frame).
    fn h(&self, pos: [f64; 2], t: f64) -> f64 {
        1.0 - pos[0] * t.cos() - pos[1] * t.sin() - self.preload * t.cos().abs()
    }

    /// In an axial groove (ambient pressure).
    fn in_groove(&self, t: f64) -> bool {
        if self.groove_rad <= 0.0 {
            return false;
        }
        // Grooves centred at ±90° from the load line (the horizontal split).
        let d = (t.rem_euclid(std::f64::consts::PI) - std::f64::consts::FRAC_PI_2).abs();
        d <= 0.5 * self.groove_rad + 1e-9
    }
}

/// A film solver for one bearing shape (L/D) and grid, keeping the last active set as the start
/// of the next solve (neighbouring positions cavitate alike).
struct Film {
    grid: Grid,
    bore: Bore,
    active: Vec<bool>,
}

/// The dimensionless film force ∬P(cos θ, sin θ)dθdZ over the whole length.
type Force = [f64; 2];

impl Film {
    fn new(bore: Bore, grid: Grid) -> Self {
        Self {
            grid,
            bore,
            active: Vec::new(),
        }
    }

    /// Film force for journal position (X, Y) and velocity (Ẋ, Ẏ) = d/dτ.
    fn force(&mut self, pos: [f64; 2], vel: [f64; 2]) -> Result<Force, String> {
        let (nt, nz) = (self.grid.around, self.grid.across);
        let dt = 2.0 * std::f64::consts::PI / nt as f64;
        // Half length over radius, L/(2R) = L/D.
        let dz = self.bore.l_over_d / nz as f64;
        let bore = self.bore;
        // Number the rings from the thickest film, where the film cavitates: the free region then
        // rarely wraps round the numbering, and the factor stays banded.
        // The nodes sit at fixed angles k·Δθ from the load line (a lobed or grooved bore is
        // fixed in space, and a grid that moved with the journal would make the force jump);
        // their numbering starts at the node nearest the thickest film.
        let t_max = pos[1].atan2(pos[0]) + std::f64::consts::PI;
        let first = (t_max / dt).round();
        let theta = |i: f64| (first + i) * dt;
        let h = |t: f64| bore.h(pos, t);
        let hdot = |t: f64| -vel[0] * t.cos() - vel[1] * t.sin();
        let n = nt * nz;
        let idx = |i: usize, j: usize| i * nz + j;
        // Row j = 0 sits on the mirror plane: half a control volume, so the matrix stays
        // symmetric.
        let weight = |j: usize| if j == 0 { 0.5 } else { 1.0 };
        let mut rhs = vec![0.0; n];
        let mut entries: Vec<(usize, usize, f64)> = Vec::with_capacity(5 * n);
        for i in 0..nt {
            let t = theta(i as f64);
            let hp = h(theta(i as f64 + 0.5)).powi(3) / (dt * dt);
            let hm = h(theta(i as f64 - 0.5)).powi(3) / (dt * dt);
            let hz = h(t).powi(3) / (dz * dz);
            let src = -(6.0 * (h(theta(i as f64 + 0.5)) - h(theta(i as f64 - 0.5))) / dt
                + 12.0 * hdot(t));
            let (ip, im) = ((i + 1) % nt, (i + nt - 1) % nt);
            for j in 0..nz {
                let w = weight(j);
                let r = idx(i, j);
                let mut diag = w * (hp + hm);
                entries.push((r, idx(ip, j), -w * hp));
                entries.push((r, idx(im, j), -w * hm));
                // Across: to j + 1 (or the end, P = 0) and to j − 1 (mirror at j = 0).
                diag += hz;
                if j + 1 < nz {
                    entries.push((r, idx(i, j + 1), -hz));
                }
                if j > 0 {
                    diag += hz;
                    entries.push((r, idx(i, j - 1), -hz));
                }
                entries.push((r, r, diag));
                rhs[r] = w * src;
            }
        }
        let groove: Vec<bool> = (0..nt).map(|i| bore.in_groove(theta(i as f64))).collect();
        if self.active.len() != n {
            self.active = (0..n).map(|r| rhs[r] <= 0.0).collect();
        }
        for (r, a) in self.active.iter_mut().enumerate() {
            if groove[r / nz] {
                *a = true;
            }
        }
        let mut p = vec![0.0; n];
        for _ in 0..60 {
            let free: Vec<usize> = (0..n).filter(|&r| !self.active[r]).collect();
            let mut map = vec![usize::MAX; n];
            for (k, &r) in free.iter().enumerate() {
                map[r] = k;
            }
            let m = free.len();
            p.iter_mut().for_each(|v| *v = 0.0);
            if m > 0 {
                let mut coo = CooMatrix::new(m, m);
                for &(r, c, v) in &entries {
                    let (a, b) = (map[r], map[c]);
                    if a != usize::MAX && b != usize::MAX {
                        coo.push(a, b, v);
                    }
                }
                let a = CscMatrix::from(&coo);
                let chol = CscCholesky::factor(&a)
                    .map_err(|e| format!("the film equations could not be factored ({e})"))?;
                let b = nalgebra::DMatrix::from_iterator(m, 1, free.iter().map(|&r| rhs[r]));
                let x = chol.solve(&b);
                for (k, &r) in free.iter().enumerate() {
                    p[r] = x[(k, 0)];
                }
            }
            // Multipliers λ = A P − f on the active nodes.
            let mut lambda = vec![0.0; n];
            for &(r, c, v) in &entries {
                if self.active[r] {
                    lambda[r] += v * p[c];
                }
            }
            let mut changed = false;
            for r in 0..n {
                if groove[r / nz] {
                    continue;
                }
                let now = if self.active[r] {
                    lambda[r] - rhs[r] > 0.0
                } else {
                    p[r] < 0.0
                };
                if now != self.active[r] {
                    self.active[r] = now;
                    changed = true;
                }
            }
            if !changed {
                if !p.iter().all(|v| v.is_finite()) {
                    return Err("the film pressure is not finite".into());
                }
                let mut f = [0.0; 2];
                for i in 0..nt {
                    let t = theta(i as f64);
                    for j in 0..nz {
                        let a = p[idx(i, j)] * weight(j) * dt * dz;
                        f[0] += a * t.cos();
                        f[1] += a * t.sin();
                    }
                }
                // Both halves of the length.
                return Ok([2.0 * f[0], 2.0 * f[1]]);
            }
        }
        Err("the cavitation boundary did not settle in 60 active-set steps".into())
    }
}

/// A finite bearing's dimensionless operating point at one eccentricity ratio.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FiniteSolution {
    /// Eccentricity ratio.
    pub eccentricity_ratio: f64,
    /// Attitude angle, degrees.
    pub attitude_angle_deg: f64,
    /// Sommerfeld number S = μNLD(R/c)²/W.
    pub sommerfeld: f64,
    /// Stiffness (x along the load) over W/c.
    pub a: [[f64; 2]; 2],
    /// Damping over W/(cω).
    pub b: [[f64; 2]; 2],
}

/// The journal position angle (from +x) at eccentricity `eps` where the film force lies along
/// +x (it carries a load along +x), and that force.
fn balance(film: &mut Film, eps: f64) -> Result<(f64, Force), String> {
    // Bracket from the short-bearing attitude (the journal sits between 0° and 90° from the
    // load line, turned toward +y, in this frame), then regula falsi on the force's y part.
    let guess = short_attitude_deg(eps).to_radians();
    let fy = |film: &mut Film, a: f64| -> Result<(f64, Force), String> {
        let f = film.force([eps * a.cos(), eps * a.sin()], [0.0, 0.0])?;
        Ok((f[1], f))
    };
    let (mut lo, mut hi) = (
        (guess - 0.3).max(0.0),
        (guess + 0.3).min(std::f64::consts::PI),
    );
    let (mut flo, _) = fy(film, lo)?;
    let (mut fhi, _) = fy(film, hi)?;
    let mut widen = 0;
    while flo.signum() == fhi.signum() && widen < 6 {
        lo = (lo - 0.3).max(-0.3);
        hi = (hi + 0.3).min(std::f64::consts::PI);
        flo = fy(film, lo)?.0;
        fhi = fy(film, hi)?.0;
        widen += 1;
    }
    if flo.signum() == fhi.signum() {
        return Err(format!(
            "no attitude angle balances the load at eccentricity ratio {eps:.3}"
        ));
    }
    let mut best = (lo, [0.0, 0.0]);
    // Illinois regula falsi.
    let mut side = 0i8;
    for _ in 0..60 {
        let a = hi - fhi * (hi - lo) / (fhi - flo);
        let (fa, f) = fy(film, a)?;
        best = (a, f);
        if fa.abs() <= 1e-12 * f[0].abs() || (hi - lo).abs() < 1e-12 {
            break;
        }
        if fa.signum() == flo.signum() {
            lo = a;
            flo = fa;
            if side == -1 {
                fhi *= 0.5;
            }
            side = -1;
        } else {
            hi = a;
            fhi = fa;
            if side == 1 {
                flo *= 0.5;
            }
            side = 1;
        }
    }
    if best.1[0] <= 0.0 {
        return Err(format!(
            "the film pushes the wrong way at eccentricity ratio {eps:.3}"
        ));
    }
    Ok(best)
}

/// Sommerfeld number and attitude angle (degrees) of a plain bearing of `l_over_d` at
/// eccentricity ratio `eps`.
pub fn finite_sommerfeld(bore: Bore, eps: f64, grid: Grid) -> Result<(f64, f64), String> {
    check_eps(eps)?;
    let l_over_d = bore.l_over_d;
    let mut film = Film::new(bore, grid);
    let (angle, f0) = balance(&mut film, eps)?;
    Ok((
        2.0 * l_over_d / (std::f64::consts::PI * f0[0]),
        angle.to_degrees(),
    ))
}

fn check_eps(eps: f64) -> Result<(), String> {
    if eps > 0.0 && eps < 0.97 {
        Ok(())
    } else {
        Err(format!(
            "eccentricity ratio {eps} is outside what the film model covers (0 to 0.97)"
        ))
    }
}

/// The dimensionless solution of a plain bearing of `l_over_d` at eccentricity ratio `eps`.
pub fn finite_at_eccentricity(bore: Bore, eps: f64, grid: Grid) -> Result<FiniteSolution, String> {
    check_eps(eps)?;
    let l_over_d = bore.l_over_d;
    let mut film = Film::new(bore, grid);
    let (angle, f0) = balance(&mut film, eps)?;
    let pos = [eps * angle.cos(), eps * angle.sin()];
    let w = f0[0];
    // K = (W/c)·a with a = (∂F̄/∂X)/|F̄|; C = (W/(cω))·b with b = (∂F̄/∂Ẋ)/|F̄|.
    let step = 1e-4;
    let mut a = [[0.0; 2]; 2];
    let mut b = [[0.0; 2]; 2];
    for j in 0..2 {
        let mut dp = [0.0; 2];
        dp[j] = step;
        let fp = film.force([pos[0] + dp[0], pos[1] + dp[1]], [0.0, 0.0])?;
        let fm = film.force([pos[0] - dp[0], pos[1] - dp[1]], [0.0, 0.0])?;
        let vp = film.force(pos, dp)?;
        let vm = film.force(pos, [-dp[0], -dp[1]])?;
        for i in 0..2 {
            a[i][j] = (fp[i] - fm[i]) / (2.0 * step) / w;
            b[i][j] = (vp[i] - vm[i]) / (2.0 * step) / w;
        }
    }
    Ok(FiniteSolution {
        eccentricity_ratio: eps,
        attitude_angle_deg: angle.to_degrees(),
        // S = L/(πR·F̄) with L/R = 2 L/D.
        sommerfeld: 2.0 * l_over_d / (std::f64::consts::PI * w),
        a,
        b,
    })
}

/// Operating point and coefficients of a finite-length plain bearing at `speed_rpm`: the
/// eccentricity whose Sommerfeld number matches the load (secant on log S, from the
/// short-bearing estimate), then the coefficients there.
pub fn plain_finite(b: &PlainBearing, speed_rpm: f64) -> Result<PlainResult, String> {
    let bore = b.bore();
    let l_over_d = bore.l_over_d;
    let n_rev_s = speed_rpm / 60.0;
    let r = b.diameter_m / 2.0;
    let target =
        b.viscosity_pa_s * n_rev_s * b.length_m * b.diameter_m * (r / b.clearance_m).powi(2)
            / b.load_n;
    let grid = Grid::default();
    let s_of = |eps: f64| finite_sommerfeld(bore, eps, grid).map(|x| x.0);
    // Short-bearing start, then secant in (ε, ln S); S falls as ε grows.
    let ss = target * std::f64::consts::PI * l_over_d * l_over_d;
    let mut e0 = short_eccentricity(ss).clamp(0.02, 0.95);
    let mut s0 = s_of(e0)?;
    let mut e1 = (e0 + if s0 > target { 0.03 } else { -0.03 }).clamp(0.01, 0.96);
    let mut s1 = s_of(e1)?;
    for _ in 0..40 {
        let g0 = s0.ln() - target.ln();
        let g1 = s1.ln() - target.ln();
        if g1.abs() < 1e-9 {
            break;
        }
        let next = if g1 != g0 {
            e1 - g1 * (e1 - e0) / (g1 - g0)
        } else {
            e1 + 0.01
        };
        // Keep within the model and never jump past half the way to 0.
        let next = next.max(0.5 * e1).clamp(0.002, 0.96);
        if (next - e1).abs() < 1e-12 {
            break;
        }
        (e0, s0) = (e1, s1);
        e1 = next;
        s1 = s_of(e1)?;
    }
    if (s1 / target - 1.0).abs() > 1e-4 {
        return Err(format!(
            "the finite bearing's operating point was not found (Sommerfeld {target:.4} wanted, \
             {s1:.4} reached at ε = {e1:.3}): load too heavy for the film (ε ≥ 0.96) or too light"
        ));
    }
    let s1 = finite_at_eccentricity(bore, e1, grid)?;
    Ok(dimensional(b, speed_rpm, &s1))
}

/// Eccentricity ratios of a [`FiniteTable`]: closer at small ε, where the cross-coupled terms
/// grow as 1/ε.
const TABLE_ECCENTRICITIES: [f64; 25] = [
    0.02, 0.04, 0.06, 0.08, 0.10, 0.12, 0.14, 0.17, 0.20, 0.24, 0.28, 0.32, 0.36, 0.40, 0.45, 0.50,
    0.55, 0.60, 0.65, 0.70, 0.75, 0.80, 0.85, 0.90, 0.95,
];

/// A finite bearing's dimensionless solutions at eccentricity ratios 0.02 … 0.95, for the rotor
/// sweep: the coefficients at any speed by linear interpolation in ln S (held beyond the ends).
#[derive(Debug, Clone, PartialEq)]
pub struct FiniteTable {
    /// The bore.
    pub bore: Bore,
    /// Rows by rising ε (falling S).
    pub rows: Vec<FiniteSolution>,
}

impl FiniteTable {
    /// Solves the film at each of its eccentricity ratios.
    pub fn new(bore: Bore) -> Result<Self, String> {
        // Rows are independent: spread them over the machine's cores.
        let threads = std::thread::available_parallelism()
            .map_or(1, |n| n.get())
            .min(8);
        let chunks: Vec<Vec<f64>> = (0..threads)
            .map(|t| {
                TABLE_ECCENTRICITIES
                    .iter()
                    .skip(t)
                    .step_by(threads)
                    .copied()
                    .collect()
            })
            .collect();
        let mut rows: Vec<FiniteSolution> = std::thread::scope(|sc| {
            let handles: Vec<_> = chunks
                .iter()
                .map(|c| {
                    sc.spawn(move || {
                        c.iter()
                            .map(|&e| finite_at_eccentricity(bore, e, Grid::default()))
                            .collect::<Result<Vec<_>, _>>()
                    })
                })
                .collect();
            let mut all = Vec::new();
            for h in handles {
                all.extend(
                    h.join()
                        .map_err(|_| "a film solve panicked".to_string())??,
                );
            }
            Ok::<_, String>(all)
        })?;
        rows.sort_by(|a, b| a.eccentricity_ratio.total_cmp(&b.eccentricity_ratio));
        Ok(Self { bore, rows })
    }

    /// The operating point at Sommerfeld number `s`: cubic (four-point Lagrange) interpolation
    /// in ln S between the table's rows, held beyond its ends.
    pub fn at(&self, s: f64) -> FiniteSolution {
        let rows = &self.rows;
        let n = rows.len();
        if s >= rows[0].sommerfeld {
            return rows[0];
        }
        if s <= rows[n - 1].sommerfeld {
            return rows[n - 1];
        }
        // Interval k: S_k ≥ s > S_{k+1}.
        let k = (0..n - 1)
            .find(|&k| s <= rows[k].sommerfeld && s > rows[k + 1].sommerfeld)
            .unwrap_or(n - 2);
        let first = k.saturating_sub(1).min(n - 4);
        let pts: Vec<&FiniteSolution> = rows[first..first + 4].iter().collect();
        let xs: Vec<f64> = pts.iter().map(|r| r.sommerfeld.ln()).collect();
        let x = s.ln();
        let w: Vec<f64> = (0..4)
            .map(|i| {
                (0..4)
                    .filter(|&j| j != i)
                    .map(|j| (x - xs[j]) / (xs[i] - xs[j]))
                    .product()
            })
            .collect();
        let mix = |f: &dyn Fn(&FiniteSolution) -> f64| -> f64 {
            pts.iter().zip(&w).map(|(r, wi)| wi * f(r)).sum()
        };
        let mut a = [[0.0; 2]; 2];
        let mut b = [[0.0; 2]; 2];
        for i in 0..2 {
            for j in 0..2 {
                a[i][j] = mix(&|r| r.a[i][j]);
                b[i][j] = mix(&|r| r.b[i][j]);
            }
        }
        FiniteSolution {
            eccentricity_ratio: mix(&|r| r.eccentricity_ratio),
            attitude_angle_deg: mix(&|r| r.attitude_angle_deg),
            sommerfeld: s,
            a,
            b,
        }
    }

    /// Dimensional result for bearing `b` at `speed_rpm`.
    pub fn result(&self, b: &PlainBearing, speed_rpm: f64) -> PlainResult {
        let r = b.diameter_m / 2.0;
        let s = b.viscosity_pa_s * speed_rpm / 60.0
            * b.length_m
            * b.diameter_m
            * (r / b.clearance_m).powi(2)
            / b.load_n;
        let x = self.at(s);
        dimensional(b, speed_rpm, &x)
    }
}

fn dimensional(b: &PlainBearing, speed_rpm: f64, x: &FiniteSolution) -> PlainResult {
    let l_over_d = b.length_m / b.diameter_m;
    let kscale = b.load_n / b.clearance_m;
    let cscale = b.load_n / (b.clearance_m * speed_rpm * std::f64::consts::PI / 30.0);
    let scale = |m: [[f64; 2]; 2], s: f64| [[s * m[0][0], s * m[0][1]], [s * m[1][0], s * m[1][1]]];
    PlainResult {
        eccentricity_ratio: x.eccentricity_ratio,
        attitude_angle_deg: x.attitude_angle_deg,
        sommerfeld: x.sommerfeld,
        modified_sommerfeld: x.sommerfeld * std::f64::consts::PI * l_over_d * l_over_d,
        k_n_per_m: scale(x.a, kscale),
        c_n_s_per_m: scale(x.b, cscale),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_free_film_carries_the_load_along_x() {
        let s = finite_at_eccentricity(Bore::plain(1.0), 0.5, Grid::default()).expect("solves");
        assert!(s.attitude_angle_deg > 0.0 && s.attitude_angle_deg < 90.0);
    }
}
