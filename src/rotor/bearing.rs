//! Bearings as eight linear coefficients, and plain journal bearings from their geometry.
//!
//! **Frame.** x is the direction of the static load on the bearing (the load acts along +x, e.g.
//! gravity with x pointing down); y completes a right-handed set with the shaft axis z, so the
//! spin (about +z) turns from x to y. The film force on the journal is
//! `f = −K q − C q̇` with `q = [x, y]` (rotor-notes §A3).
//!
//! **Short bearing.** Ocvirk's short-bearing (π-film) solution in closed form: load, attitude and
//! the dimensionless K and C of Friswell et al. (2010), whose frame has the load along −v with
//! spin from u to v (rotor-notes §B1–B2). Our (x, y) = (−v, u), so
//! `kxx = a_vv, kxy = −a_vu, kyx = −a_uv, kyy = a_uu` (the same for the damping terms).

use serde::Serialize;

/// Eight bearing coefficients at one speed, in the frame of the module notes.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Coefficients {
    /// Stiffness `[[kxx, kxy], [kyx, kyy]]`, N/m.
    pub k_n_per_m: [[f64; 2]; 2],
    /// Damping `[[cxx, cxy], [cyx, cyy]]`, N·s/m.
    pub c_n_s_per_m: [[f64; 2]; 2],
}

impl Coefficients {
    /// A bearing with direct terms only.
    pub fn isotropic(k: f64, c: f64) -> Self {
        Self {
            k_n_per_m: [[k, 0.0], [0.0, k]],
            c_n_s_per_m: [[c, 0.0], [0.0, c]],
        }
    }

    /// Linear interpolation between `a` (weight 1 − t) and `b` (weight t).
    pub fn lerp(a: &Self, b: &Self, t: f64) -> Self {
        let mix = |x: [[f64; 2]; 2], y: [[f64; 2]; 2]| {
            let mut out = [[0.0; 2]; 2];
            for i in 0..2 {
                for j in 0..2 {
                    out[i][j] = x[i][j] + t * (y[i][j] - x[i][j]);
                }
            }
            out
        };
        Self {
            k_n_per_m: mix(a.k_n_per_m, b.k_n_per_m),
            c_n_s_per_m: mix(a.c_n_s_per_m, b.c_n_s_per_m),
        }
    }
}

/// A plain (full 360°, cylindrical) journal bearing.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlainBearing {
    /// Journal diameter D, m.
    pub diameter_m: f64,
    /// Bearing length L, m.
    pub length_m: f64,
    /// Radial clearance c, m.
    pub clearance_m: f64,
    /// Lubricant dynamic viscosity μ, Pa·s.
    pub viscosity_pa_s: f64,
    /// Static load W on the bearing, N.
    pub load_n: f64,
    /// A two-lobe (elliptical) bore instead of a cylindrical one; `clearance_m` is then the
    /// lobes' machined clearance c_l.
    #[serde(skip)]
    pub two_lobe: Option<TwoLobe>,
}

/// A two-lobe bore: two arcs whose centres sit ±m·c_l from the bearing centre along the load
/// line, split horizontally by two axial grooves (rotor-notes §B5).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, serde::Deserialize)]
pub struct TwoLobe {
    /// Preload m = 1 − c_b/c_l (c_b the set clearance at top and bottom), 0 ≤ m < 0.9.
    pub preload: f64,
    /// Arc of each groove, degrees.
    pub groove_arc_deg: f64,
}

/// Which solution of the film a plain bearing's coefficients come from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum FilmMethod {
    /// Ocvirk's short-bearing closed form (valid for small L/D).
    #[default]
    Short,
    /// Finite-difference Reynolds equation with cavitation, coefficients by perturbation.
    Finite,
}

/// A plain bearing's operating point and coefficients at one speed.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PlainResult {
    /// Journal eccentricity over radial clearance.
    pub eccentricity_ratio: f64,
    /// Angle from the load line to the line of centres, in the spin direction, degrees.
    pub attitude_angle_deg: f64,
    /// Sommerfeld number S = (μN/P)(R/c)², N in rev/s, P = W/(LD) (Raimondi & Boyd's).
    pub sommerfeld: f64,
    /// Short-bearing (modified) Sommerfeld number S_s = μωDL³/(8Wc²) = π(L/D)²S.
    pub modified_sommerfeld: f64,
    /// Stiffness `[[kxx, kxy], [kyx, kyy]]`, N/m.
    pub k_n_per_m: [[f64; 2]; 2],
    /// Damping `[[cxx, cxy], [cyx, cyy]]`, N·s/m.
    pub c_n_s_per_m: [[f64; 2]; 2],
}

impl PlainResult {
    /// The coefficients alone.
    pub fn coefficients(&self) -> Coefficients {
        Coefficients {
            k_n_per_m: self.k_n_per_m,
            c_n_s_per_m: self.c_n_s_per_m,
        }
    }
}

impl PlainBearing {
    /// Checks the geometry and operating data; the message names the bad value.
    pub fn validate(&self) -> Result<(), String> {
        let check = |name: &str, v: f64, lo: f64, hi: f64, unit: &str| {
            if v.is_finite() && v > lo && v <= hi {
                Ok(())
            } else {
                Err(format!(
                    "{name} {v} {unit} must be above {lo} and at most {hi} {unit}"
                ))
            }
        };
        check("diameter", self.diameter_m, 0.0, 10.0, "m")?;
        check("length", self.length_m, 0.0, 10.0, "m")?;
        check("radial clearance", self.clearance_m, 0.0, 0.1, "m")?;
        check("viscosity", self.viscosity_pa_s, 0.0, 100.0, "Pa·s")?;
        check("load", self.load_n, 0.0, 1e9, "N")?;
        if let Some(t) = &self.two_lobe {
            if !(t.preload.is_finite() && (0.0..0.9).contains(&t.preload)) {
                return Err(format!("preload {} must be ≥ 0 and below 0.9", t.preload));
            }
            if !(t.groove_arc_deg.is_finite() && (0.0..=60.0).contains(&t.groove_arc_deg)) {
                return Err(format!("groove arc {}° must be 0 to 60°", t.groove_arc_deg));
            }
        }
        if self.clearance_m >= 0.05 * self.diameter_m {
            return Err(format!(
                "radial clearance {} m is not small against the diameter {} m (a film bearing's \
                 is about 1/1000 of it)",
                self.clearance_m, self.diameter_m
            ));
        }
        Ok(())
    }

    /// Operating point and coefficients at `speed_rpm` (> 0) by `method`.
    pub fn at_speed(&self, speed_rpm: f64, method: FilmMethod) -> Result<PlainResult, String> {
        self.validate()?;
        if !(speed_rpm.is_finite() && speed_rpm > 0.0) {
            return Err(format!(
                "speed {speed_rpm} rpm: a film bearing needs a positive speed"
            ));
        }
        match method {
            FilmMethod::Short if self.two_lobe.is_some() => Err(
                "a two-lobe bore has no short-bearing closed form: use the finite method".into(),
            ),
            FilmMethod::Short => Ok(self.short(speed_rpm)),
            FilmMethod::Finite => super::reynolds::plain_finite(self, speed_rpm),
        }
    }

    /// The dimensionless bore.
    pub fn bore(&self) -> super::reynolds::Bore {
        super::reynolds::Bore {
            l_over_d: self.length_m / self.diameter_m,
            preload: self.two_lobe.map_or(0.0, |t| t.preload),
            groove_rad: self.two_lobe.map_or(0.0, |t| t.groove_arc_deg.to_radians()),
        }
    }

    /// Short-bearing solution.
    fn short(&self, speed_rpm: f64) -> PlainResult {
        let w = speed_rpm * std::f64::consts::PI / 30.0;
        let (d, l, c) = (self.diameter_m, self.length_m, self.clearance_m);
        let ss = self.viscosity_pa_s * w * d * l.powi(3) / (8.0 * self.load_n * c * c);
        let eps = short_eccentricity(ss);
        let (a, b) = short_coefficients(eps);
        let kscale = self.load_n / c;
        let cscale = self.load_n / (c * w);
        let to_xy = |m: [[f64; 2]; 2], s: f64| {
            // (x, y) = (−v, u): see the module notes.
            [[s * m[1][1], -s * m[1][0]], [-s * m[0][1], s * m[0][0]]]
        };
        PlainResult {
            eccentricity_ratio: eps,
            attitude_angle_deg: short_attitude_deg(eps),
            sommerfeld: ss / (std::f64::consts::PI * (l / d).powi(2)),
            modified_sommerfeld: ss,
            k_n_per_m: to_xy(a, kscale),
            c_n_s_per_m: to_xy(b, cscale),
        }
    }
}

/// Short-bearing modified Sommerfeld number at eccentricity ratio ε:
/// S_s = (1−ε²)² / (ε √(π²(1−ε²) + 16ε²)) (rotor-notes §B1).
pub fn short_sommerfeld(eps: f64) -> f64 {
    let pi2 = std::f64::consts::PI.powi(2);
    let e2 = eps * eps;
    (1.0 - e2).powi(2) / (eps * (pi2 * (1.0 - e2) + 16.0 * e2).sqrt())
}

/// The eccentricity ratio whose short-bearing Sommerfeld number is `ss` (S_s falls monotonically
/// from ∞ at ε = 0 to 0 at ε = 1; bisection to machine precision).
pub fn short_eccentricity(ss: f64) -> f64 {
    let (mut lo, mut hi) = (0.0f64, 1.0f64);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if short_sommerfeld(mid) > ss {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// Short-bearing attitude angle, degrees: tan φ = π√(1−ε²)/(4ε).
pub fn short_attitude_deg(eps: f64) -> f64 {
    (std::f64::consts::PI * (1.0 - eps * eps).sqrt())
        .atan2(4.0 * eps)
        .to_degrees()
}

/// Dimensionless short-bearing stiffness `a` (K = (W/c)·a) and damping `b` (C = (W/(cω))·b) in
/// the (u, v) frame of Friswell et al. (2010, from memory; confirmed by numerical linearisation
/// in rotor-notes §B2): `[[a_uu, a_uv], [a_vu, a_vv]]`.
pub fn short_coefficients(eps: f64) -> ([[f64; 2]; 2], [[f64; 2]; 2]) {
    let pi = std::f64::consts::PI;
    let pi2 = pi * pi;
    let e2 = eps * eps;
    let h0 = (pi2 * (1.0 - e2) + 16.0 * e2).powf(-1.5);
    let s = (1.0 - e2).sqrt();
    let auu = 4.0 * h0 * (pi2 * (2.0 - e2) + 16.0 * e2);
    let auv = h0 * pi * (pi2 * (1.0 - e2).powi(2) - 16.0 * e2 * e2) / (eps * s);
    let avu = -h0 * pi * (pi2 * (1.0 - e2) * (1.0 + 2.0 * e2) + 32.0 * e2 * (1.0 + e2)) / (eps * s);
    let avv = 4.0 * h0 * (pi2 * (1.0 + 2.0 * e2) + 32.0 * e2 * (1.0 + e2) / (1.0 - e2));
    let buu = 2.0 * pi * h0 * s * (pi2 * (1.0 + 2.0 * e2) - 16.0 * e2) / eps;
    let buv = -8.0 * h0 * (pi2 * (1.0 + 2.0 * e2) - 16.0 * e2);
    let bvv = 2.0 * pi * h0 * (pi2 * (1.0 - e2).powi(2) + 48.0 * e2) / (eps * s);
    ([[auu, auv], [avu, avv]], [[buu, buv], [buv, bvv]])
}

/// Where a bearing's coefficients come from.
#[derive(Debug, Clone, PartialEq)]
pub enum BearingLaw {
    /// The same at every speed.
    Constant(Coefficients),
    /// Tabulated against speed (rpm, ascending), interpolated linearly, held beyond the ends.
    Table(Vec<(f64, Coefficients)>),
    /// Computed from a plain bearing's geometry at every speed.
    Plain(PlainBearing, FilmMethod),
    /// A finite plain bearing's solutions tabulated once against eccentricity and interpolated
    /// in the Sommerfeld number at each speed ([`BearingLaw::prepared`] makes it).
    PlainTable(PlainBearing, std::sync::Arc<super::reynolds::FiniteTable>),
}

impl BearingLaw {
    /// The coefficients at `speed_rpm`. A plain bearing at rest (no film) is given the
    /// coefficients of its lowest computable speed, 1 rpm.
    pub fn at(&self, speed_rpm: f64) -> Result<Coefficients, String> {
        match self {
            BearingLaw::Constant(c) => Ok(*c),
            BearingLaw::Table(t) => {
                let first = t.first().ok_or("an empty speed table")?;
                if speed_rpm <= first.0 {
                    return Ok(first.1);
                }
                for w in t.windows(2) {
                    if speed_rpm <= w[1].0 {
                        let f = (speed_rpm - w[0].0) / (w[1].0 - w[0].0);
                        return Ok(Coefficients::lerp(&w[0].1, &w[1].1, f));
                    }
                }
                Ok(t.last().map_or(first.1, |l| l.1))
            }
            BearingLaw::Plain(p, m) => Ok(p.at_speed(speed_rpm.max(1.0), *m)?.coefficients()),
            BearingLaw::PlainTable(p, t) => Ok(t.result(p, speed_rpm.max(1.0)).coefficients()),
        }
    }

    /// The law ready for a speed sweep: a finite plain bearing's film is solved once over its
    /// eccentricity range (≈ 4 s) instead of at every speed.
    pub fn prepared(&self) -> Result<Self, String> {
        match self {
            BearingLaw::Plain(p, FilmMethod::Finite) => {
                p.validate()?;
                let table = super::reynolds::FiniteTable::new(p.bore())?;
                Ok(BearingLaw::PlainTable(*p, std::sync::Arc::new(table)))
            }
            other => Ok(other.clone()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn short_sommerfeld_inverts() {
        // rotor-notes §B2 inverse check [der]: S_s = 1, 0.3, 0.1, 0.03 → ε.
        for (ss, eps) in [
            (1.0, 0.268227),
            (0.3, 0.520994),
            (0.1, 0.704790),
            (0.03, 0.832819),
        ] {
            assert!((short_eccentricity(ss) - eps).abs() < 2e-6, "{ss}");
        }
    }
}
