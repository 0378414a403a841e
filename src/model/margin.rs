//! Running-speed margin check (API RP 684 2nd ed. 2005, from memory — confirm against the
//! standard in force): amplification factor AF ≈ 1/(2ζ) by the half-power method; no separation
//! margin needed when AF < 2.5; below the minimum operating speed SM = min[16, 17(1 − 1/(AF − 1.5))] %;
//! above the maximum continuous speed SM = min[26, 10 + 17(1 − 1/(AF − 1.5))] %. The rule's
//! numbers can be changed by the user. Advisory only.

use serde::{Deserialize, Serialize};

/// The margin rule, with the API RP 684 numbers as the default.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct MarginRule {
    /// Below this AF no separation margin is required.
    pub af_threshold: f64,
    /// Largest margin required below the operating range, %.
    pub below_cap_pct: f64,
    /// Largest margin required above the operating range, %.
    pub above_cap_pct: f64,
    /// Offset of the rule above the operating range, %.
    pub above_offset_pct: f64,
    /// Slope of both rules, %.
    pub slope_pct: f64,
}

impl Default for MarginRule {
    fn default() -> Self {
        Self {
            af_threshold: 2.5,
            below_cap_pct: 16.0,
            above_cap_pct: 26.0,
            above_offset_pct: 10.0,
            slope_pct: 17.0,
        }
    }
}

/// Amplification factor from a damping ratio, AF = 1/(2ζ) (half-power method); ∞ when undamped.
pub fn amplification_factor(zeta: Option<f64>) -> f64 {
    match zeta {
        Some(z) if z > 0.0 => 1.0 / (2.0 * z),
        _ => f64::INFINITY,
    }
}

impl MarginRule {
    /// Margin required for a resonance below the operating range, %.
    pub fn below_pct(&self, af: f64) -> f64 {
        self.required(af, 0.0, self.below_cap_pct)
    }

    /// Margin required for a resonance above the operating range, %.
    pub fn above_pct(&self, af: f64) -> f64 {
        self.required(af, self.above_offset_pct, self.above_cap_pct)
    }

    /// offset + slope·(1 − 1/(AF − 1.5)), capped; none below the AF threshold; the cap when
    /// the damping (so AF) is not known.
    fn required(&self, af: f64, offset: f64, cap: f64) -> f64 {
        if af < self.af_threshold {
            return 0.0;
        }
        let t = if af.is_finite() {
            1.0 - 1.0 / (af - 1.5)
        } else {
            1.0
        };
        (offset + self.slope_pct * t).clamp(0.0, cap)
    }
}

/// Where a resonance lies relative to the operating range.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Side {
    /// Below the minimum operating speed.
    Below,
    /// Inside the operating range.
    Inside,
    /// Above the maximum continuous speed.
    Above,
}

/// One resonance against one order of running speed.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MarginCheck {
    /// Natural frequency, Hz.
    pub frequency_hz: f64,
    /// Order of running speed (1 = 1×).
    pub order: u32,
    /// The running speed that excites it at this order, rpm.
    pub critical_rpm: f64,
    /// Amplification factor (∞ when the damping is not known).
    pub amplification_factor: f64,
    /// Where it lies.
    pub side: Side,
    /// Separation from the nearer end of the range, % of that end (negative inside).
    pub margin_pct: f64,
    /// What the rule asks, %.
    pub required_pct: f64,
    /// Margin met.
    pub ok: bool,
}

/// Checks each resonance (frequency Hz, damping ratio if known) at each order against the
/// operating range `[min, max]` rpm.
pub fn check(
    resonances: &[(f64, Option<f64>)],
    speed_rpm: [f64; 2],
    orders: &[u32],
    rule: &MarginRule,
) -> Vec<MarginCheck> {
    let [lo, hi] = speed_rpm;
    let mut out = Vec::new();
    for &(f, z) in resonances {
        let af = amplification_factor(z);
        for &k in orders {
            let nc = f * 60.0 / k as f64;
            let (side, margin, required) = if nc < lo {
                (Side::Below, (lo - nc) / lo * 100.0, rule.below_pct(af))
            } else if nc > hi {
                (Side::Above, (nc - hi) / hi * 100.0, rule.above_pct(af))
            } else {
                let m = -((nc - lo).min(hi - nc)) / hi * 100.0;
                (
                    Side::Inside,
                    m,
                    if af < rule.af_threshold {
                        0.0
                    } else {
                        f64::INFINITY
                    },
                )
            };
            let ok = if side == Side::Inside {
                af < rule.af_threshold
            } else {
                margin >= required
            };
            out.push(MarginCheck {
                frequency_hz: f,
                order: k,
                critical_rpm: nc,
                amplification_factor: af,
                side,
                margin_pct: margin,
                required_pct: required,
                ok,
            });
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand from the formulas above: ζ = 0.05 → AF = 10;
    /// below: 17(1 − 1/8.5) = 15.0 %; above: 10 + 15.0 = 25.0 %. ζ = 0.25 → AF = 2 < 2.5: none.
    #[test]
    fn rule_by_hand() {
        let r = MarginRule::default();
        let af = amplification_factor(Some(0.05));
        assert!((af - 10.0).abs() < 1e-12);
        assert!((r.below_pct(af) - 15.0).abs() < 1e-9);
        assert!((r.above_pct(af) - 25.0).abs() < 1e-9);
        assert_eq!(r.below_pct(2.0), 0.0);
        // AF = 3: 17(1 − 1/1.5) = 5.667 %, 15.667 % above.
        assert!((r.below_pct(3.0) - 17.0 / 3.0).abs() < 1e-9);
        assert!((r.above_pct(3.0) - (10.0 + 17.0 / 3.0)).abs() < 1e-9);
        // Undamped (model criticals): the caps.
        assert_eq!(r.below_pct(f64::INFINITY), 16.0);
        assert_eq!(r.above_pct(f64::INFINITY), 26.0);
    }

    /// A 2950–3050 rpm pump: a 60 Hz mode (3600 rpm at 1×) is 18 % above 3050 rpm; with AF = 10
    /// it needs 25 %: fails. Its 2× critical is 1800 rpm, 39 % below 2950: passes 15 %.
    #[test]
    fn check_sides() {
        let c = check(
            &[(60.0, Some(0.05))],
            [2950.0, 3050.0],
            &[1, 2],
            &MarginRule::default(),
        );
        assert_eq!(c[0].side, Side::Above);
        assert!((c[0].margin_pct - (3600.0 - 3050.0) / 3050.0 * 100.0).abs() < 1e-9);
        assert!(!c[0].ok);
        assert_eq!(c[1].side, Side::Below);
        assert!((c[1].margin_pct - (2950.0 - 1800.0) / 2950.0 * 100.0).abs() < 1e-9);
        assert!(c[1].ok);
        let inside = check(
            &[(50.0, Some(0.01))],
            [2950.0, 3050.0],
            &[1],
            &MarginRule::default(),
        );
        assert_eq!(inside[0].side, Side::Inside);
        assert!(!inside[0].ok);
    }
}
