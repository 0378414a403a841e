//! A model study: the shaft as tested, its bearings in service and the running speed, evaluated in
//! one go against a test's modes — correlation, critical speeds on the bearings, the
//! support-stiffness map and the margin check. Saved in the session; the window and the commands
//! share it.

use serde::{Deserialize, Serialize};

use super::beam::{BeamTheory, Shaft, Support};
use super::correlate::{Correlation, correlate, sweep_supports};
use super::margin::{MarginCheck, MarginRule, check};
use super::run::{Converged, converged_modes_to};

/// Modes reported by each model solution (the first few cover every running-speed question on a
/// bench-sized part).
pub const MODEL_MODES: usize = 8;
/// Mesh convergence of a study's modes (relative change per mesh halving). Looser than
/// [`super::run::CONVERGED`]: fitted test frequencies carry errors of 1e-4 or more, Timoshenko
/// elements of a thick shaft converge only as h² once shear dominates an element, and the dense
/// eigensolver's cost grows as the cube of the mesh, so 1e-5 can cost the window half a minute
/// for nothing it could show.
pub const STUDY_CONVERGED: f64 = 1e-4;
/// Points of the stiffness sweep.
pub const MAP_POINTS: usize = 41;
/// Modes followed through the stiffness sweep.
pub const MAP_MODES: usize = 6;

fn default_orders() -> Vec<u32> {
    vec![1, 2]
}

fn default_min_mac() -> f64 {
    0.6
}

/// The model and the service questions asked of it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Study {
    /// The shaft as tested: its supports are the bench suspension (none = free-free).
    pub shaft: Shaft,
    /// Bearings in service (position and nominal stiffness); empty = not given.
    #[serde(default)]
    pub bearings: Vec<Support>,
    /// Range the bearing stiffness may take in service, N/m.
    #[serde(default)]
    pub bearing_band_n_per_m: Option<[f64; 2]>,
    /// Operating speed range, rpm.
    #[serde(default)]
    pub running_speed_rpm: Option<[f64; 2]>,
    /// Orders of running speed to check (1 = 1×).
    #[serde(default = "default_orders")]
    pub orders: Vec<u32>,
    /// The margin rule.
    #[serde(default)]
    pub rule: MarginRule,
    /// Stiffness sweep range, N/m (`None`: from nearly free to nearly rigid for this shaft).
    #[serde(default)]
    pub stiffness_range_n_per_m: Option<[f64; 2]>,
    /// Smallest MAC that pairs a test mode with a model mode.
    #[serde(default = "default_min_mac")]
    pub min_mac: f64,
    /// The rotor in service for the at-speed analysis, in the rotor file's keys (`bearings` with
    /// eight coefficients or a plain bearing's geometry, `unbalances`, `operating_range_rpm`;
    /// README "The rotor at speed"). `None`: the bearings in service above, as undamped
    /// isotropic springs.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rotor: Option<serde_json::Value>,
}

impl Study {
    /// A study of `shaft` with nothing asked yet.
    pub fn new(shaft: Shaft) -> Self {
        Self {
            shaft,
            bearings: Vec::new(),
            bearing_band_n_per_m: None,
            running_speed_rpm: None,
            orders: default_orders(),
            rule: MarginRule::default(),
            stiffness_range_n_per_m: None,
            min_mac: default_min_mac(),
            rotor: None,
        }
    }

    /// The shaft in service: the bench suspension replaced by the bearings (`None` without
    /// bearings).
    pub fn in_service(&self) -> Option<Shaft> {
        if self.bearings.is_empty() {
            return None;
        }
        let mut s = self.shaft.clone();
        s.supports = self.bearings.clone();
        Some(s)
    }

    /// Checks the shaft, the bearings and the ranges; the message names the bad item.
    pub fn validate(&self) -> Result<(), String> {
        self.shaft.validate()?;
        if let Some(s) = self.in_service() {
            s.validate().map_err(|m| m.replace("support", "bearing"))?;
        }
        let range = |name: &str, r: Option<[f64; 2]>, top: f64| match r {
            Some([lo, hi]) if !(lo > 0.0 && hi >= lo && hi <= top) => Err(format!(
                "{name} {lo}–{hi} must satisfy 0 < low ≤ high ≤ {top:e}"
            )),
            _ => Ok(()),
        };
        range("running speed (rpm)", self.running_speed_rpm, 1e6)?;
        range(
            "bearing stiffness band (N/m)",
            self.bearing_band_n_per_m,
            1e14,
        )?;
        range("stiffness sweep (N/m)", self.stiffness_range_n_per_m, 1e14)?;
        if self.orders.len() > 20 || self.orders.iter().any(|&o| o > 100) {
            return Err("give at most 20 orders of running speed, each at most 100".into());
        }
        let r = &self.rule;
        for (name, v) in [
            ("AF threshold", r.af_threshold),
            ("margin cap below the range (%)", r.below_cap_pct),
            ("margin cap above the range (%)", r.above_cap_pct),
            ("offset above the range (%)", r.above_offset_pct),
            ("slope of the rule (%)", r.slope_pct),
        ] {
            if !(v.is_finite() && (0.0..=1000.0).contains(&v)) {
                return Err(format!("margin rule: {name} {v} must lie in 0–1000"));
            }
        }
        if let Some([lo, hi]) = self.stiffness_range_n_per_m
            && hi <= lo
        {
            return Err("the stiffness sweep needs low < high".into());
        }
        if self.orders.contains(&0) {
            return Err("orders of running speed start at 1".into());
        }
        if !(0.0..=1.0).contains(&self.min_mac) {
            return Err(format!("pairing MAC {} must lie in 0–1", self.min_mac));
        }
        Ok(())
    }

    /// The sweep range: as given, else whole decades from K* = kL³/EI = 0.1 (a nearly free
    /// shaft) to 10⁵ (nearly pinned), EI of the stiffest section.
    pub fn sweep_range(&self) -> [f64; 2] {
        if let Some(r) = self.stiffness_range_n_per_m {
            return r;
        }
        let l = self.shaft.length_m();
        let ei = self
            .shaft
            .sections
            .iter()
            .map(|s| {
                let m = s.material.unwrap_or(self.shaft.material);
                let d4 = s.outer_diameter_m.powi(4) - s.inner_diameter_m.powi(4);
                m.youngs_modulus_pa * std::f64::consts::PI * d4 / 64.0
            })
            .fold(0.0f64, f64::max);
        let k_ref = ei / l.powi(3);
        [
            10f64.powf((0.1 * k_ref).log10().floor()),
            10f64.powf((1e5 * k_ref).log10().ceil()),
        ]
    }
}

/// Modes found by a test, as the study needs them.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct TestModes {
    /// Station positions, m.
    pub positions_m: Vec<f64>,
    /// Modes: frequency (Hz), damping ratio if known, real shape at the stations.
    pub modes: Vec<(f64, Option<f64>, Vec<f64>)>,
    /// Band the test covered, Hz.
    pub band_hz: [f64; 2],
}

impl TestModes {
    /// The modes of a fit (real parts of the shapes, which the fit has rotated to their principal
    /// axis) over the band the test covered.
    pub fn from_modal(m: &crate::modal::ModalResult, band_hz: [f64; 2]) -> Self {
        Self {
            positions_m: m.positions_m.clone(),
            modes: m
                .modes
                .iter()
                .map(|x| {
                    (
                        x.frequency_hz,
                        x.damping_ratio,
                        x.shape.iter().map(|c| c.re).collect(),
                    )
                })
                .collect(),
            band_hz,
        }
    }
}

/// Natural frequencies against support stiffness.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StiffnessMap {
    /// Stiffness of every swept support, N/m (log spaced).
    pub stiffness_n_per_m: Vec<f64>,
    /// frequencies_hz[mode][point].
    pub frequencies_hz: Vec<Vec<f64>>,
    /// The bearings were swept (else the bench supports).
    pub bearings: bool,
}

/// Where a margin line's resonance comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ResonanceSource {
    /// A measured mode (the part as tested).
    Measured,
    /// The model on its bearings at nominal stiffness.
    ModelInService,
    /// The model as tested (no bearings given).
    ModelAsTested,
}

/// One margin line with where its resonance came from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MarginLine {
    /// Source of the resonance.
    pub source: ResonanceSource,
    /// Mode number within its source (1-based).
    pub mode: usize,
    /// The check.
    pub check: MarginCheck,
}

/// Everything the study computed.
#[derive(Debug, Clone)]
pub struct StudyResult {
    /// The model as tested, with nodes at the test stations.
    pub tested: Converged,
    /// Test against model, when a test was given.
    pub correlation: Option<Correlation>,
    /// Flexible model modes inside the tested band that no test mode pairs with.
    pub missed_in_band: Vec<usize>,
    /// The model on its bearings at nominal stiffness.
    pub service: Option<Converged>,
    /// The stiffness sweep.
    pub map: Option<StiffnessMap>,
    /// Margin lines, when a running speed was given.
    pub margins: Vec<MarginLine>,
    /// Things the reader must know.
    pub warnings: Vec<String>,
}

impl StudyResult {
    /// The margin lines, closest calls first: failing lines, then by how little margin is left
    /// over the rule's.
    pub fn margins_closest_first(&self) -> Vec<&MarginLine> {
        let spare = |l: &MarginLine| l.check.margin_pct - l.check.required_pct.min(1e9);
        let mut lines: Vec<&MarginLine> = self.margins.iter().collect();
        lines.sort_by(|a, b| {
            a.check
                .ok
                .cmp(&b.check.ok)
                .then(spare(a).total_cmp(&spare(b)))
        });
        lines
    }
}

/// The model's solves, which depend on the shaft, its bearings and the stations only — not on
/// the test's modes, the running speed or the margin rule. Kept between evaluations so a new fit
/// (a verdict changed, a pole taken) only pairs modes and checks margins again.
#[derive(Debug, Clone, Default)]
pub struct ModelCache {
    key: String,
    tested: Option<Converged>,
    service: Option<Option<Converged>>,
    map: Option<Option<StiffnessMap>>,
}

impl ModelCache {
    /// The cache for `key`, emptied first when it was made for another.
    fn take_for(&mut self, key: &str) -> &mut Self {
        if self.key != key {
            *self = ModelCache {
                key: key.to_string(),
                ..ModelCache::default()
            };
        }
        self
    }
}

/// Evaluates the study, against `test` when given.
pub fn evaluate(study: &Study, test: Option<&TestModes>) -> Result<StudyResult, String> {
    evaluate_cached(study, test, &mut ModelCache::default())
}

/// [`evaluate`], reusing the model's solves in `cache` when the shaft, bearings, stations and
/// mode count are those it was made for.
pub fn evaluate_cached(
    study: &Study,
    test: Option<&TestModes>,
    cache: &mut ModelCache,
) -> Result<StudyResult, String> {
    study.validate()?;
    let mut warnings = Vec::new();
    let length = study.shaft.length_m();
    let positions: Vec<f64> = test.map(|t| t.positions_m.clone()).unwrap_or_default();
    if let Some(x) = positions
        .iter()
        .find(|x| !(-1e-9..=length + 1e-9).contains(*x))
    {
        return Err(format!(
            "a station at {x} m lies outside the model (0 to {length} m): check the station \
             positions or the section lengths"
        ));
    }
    let n_test = test.map_or(0, |t| t.modes.len());
    let count = MODEL_MODES.max(n_test + 4);
    let key = serde_json::to_string(&(
        &study.shaft,
        &study.bearings,
        study.bearing_band_n_per_m,
        study.stiffness_range_n_per_m,
        &positions,
        count,
    ))
    .unwrap_or_default();
    let cache = cache.take_for(&key);
    let tested = match &cache.tested {
        Some(t) => t.clone(),
        None => {
            let t = converged_modes_to(
                &study.shaft,
                BeamTheory::Timoshenko,
                count,
                &positions,
                STUDY_CONVERGED,
            )?;
            cache.tested = Some(t.clone());
            t
        }
    };
    let (correlation, missed_in_band) = match test {
        Some(t) if !t.modes.is_empty() => {
            let shapes: Vec<(f64, Vec<f64>)> = t.modes.iter().map(|m| (m.0, m.2.clone())).collect();
            let c = correlate(
                &t.positions_m,
                &shapes,
                &tested.nodes_m,
                &tested.modes,
                study.min_mac,
            );
            let missed = c
                .unpaired_model
                .iter()
                .copied()
                .filter(|&j| {
                    let f = tested.modes[j].frequency_hz;
                    (t.band_hz[0]..=t.band_hz[1]).contains(&f)
                })
                .collect();
            (Some(c), missed)
        }
        _ => (None, Vec::new()),
    };
    let service = match &cache.service {
        Some(s) => s.clone(),
        None => {
            let s = match &study.in_service() {
                Some(s) => Some(converged_modes_to(
                    s,
                    BeamTheory::Timoshenko,
                    MODEL_MODES,
                    &[],
                    STUDY_CONVERGED,
                )?),
                None => None,
            };
            cache.service = Some(s.clone());
            s
        }
    };
    let map = match &cache.map {
        Some(m) => m.clone(),
        None => {
            let m = stiffness_sweep(study)?;
            cache.map = Some(m.clone());
            m
        }
    };
    if map.is_none() {
        warnings.push(
            "no bearings and no bench supports: give bearing positions for the stiffness map"
                .into(),
        );
    }
    let mut margins = Vec::new();
    if let Some(speed) = study.running_speed_rpm {
        let mut push = |source, list: Vec<(f64, Option<f64>)>| {
            let checks = check(&list, speed, &study.orders, &study.rule);
            for (i, c) in checks.into_iter().enumerate() {
                margins.push(MarginLine {
                    source,
                    mode: i / study.orders.len().max(1) + 1,
                    check: c,
                });
            }
        };
        if let Some(t) = test {
            push(
                ResonanceSource::Measured,
                t.modes.iter().map(|m| (m.0, m.1)).collect(),
            );
        }
        let (source, model) = match &service {
            Some(c) => (ResonanceSource::ModelInService, c),
            None => (ResonanceSource::ModelAsTested, &tested),
        };
        push(
            source,
            model
                .modes
                .iter()
                .filter(|m| !m.rigid_body)
                .map(|m| (m.frequency_hz, None))
                .collect(),
        );
        if service.is_none() {
            warnings.push(
                "no bearings given: the model's critical speeds are those of the part as tested, \
                 not installed"
                    .into(),
            );
        }
    }
    Ok(StudyResult {
        tested,
        correlation,
        missed_in_band,
        service,
        map,
        margins,
        warnings,
    })
}

/// Elements of the sweep's mesh: a map is read by eye, and on it the first six modes of a
/// bench-sized shaft lie within 0.1 % of converged (5e-4 measured) (checked in the tests).
pub const MAP_ELEMENTS: usize = 48;

/// Sweeps the bearings (else the bench supports) over the study's range on one mesh.
fn stiffness_sweep(study: &Study) -> Result<Option<StiffnessMap>, String> {
    let (base, bearings) = match study.in_service() {
        Some(s) => (s, true),
        None => (study.shaft.clone(), false),
    };
    if base.supports.is_empty() {
        return Ok(None);
    }
    let points = sweep_supports(&base, study.sweep_range(), MAP_POINTS, |s| {
        let (_, modes) = s.modes(BeamTheory::Timoshenko, MAP_MODES, MAP_ELEMENTS, &[])?;
        Ok(modes.iter().map(|m| m.frequency_hz).collect())
    })?;
    let ks = points.iter().map(|p| p.0).collect();
    let freq = (0..MAP_MODES)
        .map(|i| points.iter().map(|p| p.1[i]).collect())
        .collect();
    Ok(Some(StiffnessMap {
        stiffness_n_per_m: ks,
        frequencies_hz: freq,
        bearings,
    }))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::beam::{Material, Section};

    fn uniform(l: f64, d: f64) -> Shaft {
        Shaft {
            material: Material::STEEL,
            sections: vec![Section {
                length_m: l,
                outer_diameter_m: d,
                inner_diameter_m: 0.0,
                material: None,
            }],
            discs: vec![],
            supports: vec![],
        }
    }

    /// The cache gives what a fresh evaluation gives; a changed shaft is solved again.
    #[test]
    fn cached_solves_equal_fresh_ones_and_follow_the_shaft() {
        let mut st = Study::new(uniform(0.9, 0.04));
        st.bearings = vec![Support::lateral(0.1, 1e8), Support::lateral(0.8, 1e8)];
        st.running_speed_rpm = Some([2900.0, 3000.0]);
        let test = |f: f64| TestModes {
            positions_m: vec![0.0, 0.3, 0.6, 0.9],
            modes: vec![(f, Some(0.01), vec![1.0, -0.4, -0.4, 1.0])],
            band_hz: [10.0, 2000.0],
        };
        let mut cache = ModelCache::default();
        let a = evaluate_cached(&st, Some(&test(250.0)), &mut cache).unwrap();
        assert!(cache.tested.is_some() && cache.map.is_some());
        // Another fit (a verdict changed): the same solves, new margins.
        let b = evaluate_cached(&st, Some(&test(260.0)), &mut cache).unwrap();
        let fresh = evaluate(&st, Some(&test(260.0))).unwrap();
        assert_eq!(b.tested.modes, fresh.tested.modes);
        assert_eq!(b.margins, fresh.margins);
        assert_ne!(a.margins, b.margins);
        // A thicker shaft is a new model.
        st.shaft.sections[0].outer_diameter_m = 0.05;
        let c = evaluate_cached(&st, Some(&test(260.0)), &mut cache).unwrap();
        assert!(c.tested.modes[2].frequency_hz > b.tested.modes[2].frequency_hz);
    }

    /// Euler–Bernoulli pinned-pinned (Blevins 1979): f₁ = (π/2)·√(EI/ρA)/L². Bearings far
    /// stiffer than the shaft at the ends approach it from below; a slender 1 m × 20 mm shaft
    /// keeps Timoshenko within 0.1 % of it.
    #[test]
    fn rigid_end_bearings_give_the_pinned_critical() {
        let mut st = Study::new(uniform(1.0, 0.02));
        st.bearings = vec![Support::lateral(0.0, 1e12), Support::lateral(1.0, 1e12)];
        st.running_speed_rpm = Some([2900.0, 3000.0]);
        let r = evaluate(&st, None).expect("evaluates");
        let m = Material::STEEL;
        let i = std::f64::consts::PI * 0.02f64.powi(4) / 64.0;
        let a = std::f64::consts::PI * 0.01f64.powi(2);
        let f1 =
            std::f64::consts::FRAC_PI_2 * (m.youngs_modulus_pa * i / (m.density_kg_m3 * a)).sqrt();
        let got = r.service.as_ref().expect("service modes").modes[0].frequency_hz;
        assert!(((got - f1) / f1).abs() < 1e-3, "{got} vs {f1}");
        // The sweep ends near pinned and starts near the free rigid-body (bounce) modes.
        let map = r.map.expect("map");
        assert!(map.bearings);
        let last = *map.frequencies_hz[0].last().expect("points");
        assert!(((last - f1) / f1).abs() < 0.01, "{last} vs {f1}");
        assert!(map.frequencies_hz[0][0] < 0.2 * f1);
        // Margin lines: model in service only (no test), 1× and 2× per flexible mode.
        assert!(
            r.margins
                .iter()
                .all(|l| l.source == ResonanceSource::ModelInService)
        );
        assert_eq!(r.margins.len(), 2 * MODEL_MODES);
        assert!((r.margins[0].check.critical_rpm - got * 60.0).abs() < 1e-6);
    }

    /// The automatic sweep spans K* = 0.1 … 10⁵ in whole decades (common practice: the
    /// spring-support sweeps of a shaft usually run K* = 1 … 1000).
    #[test]
    fn automatic_sweep_range() {
        let st = Study::new(uniform(1.0, 0.02));
        let ei = 210e9 * std::f64::consts::PI * 0.02f64.powi(4) / 64.0;
        let [lo, hi] = st.sweep_range();
        assert!(lo <= 0.1 * ei && lo > 0.01 * ei);
        assert!(hi >= 1e5 * ei && hi < 1e6 * ei);
        assert!(lo.log10().fract().abs() < 1e-9);
    }

    /// The sweep's fixed mesh against converged modes at three stiffnesses (the claim on
    /// [`MAP_ELEMENTS`]); a stepped 0.9 m shaft on two bearings.
    #[test]
    fn sweep_mesh_is_close_to_converged() {
        let mut shaft = uniform(0.9, 0.045);
        shaft.sections[0].length_m = 0.15;
        shaft.sections[0].outer_diameter_m = 0.035;
        shaft.sections.push(Section {
            length_m: 0.6,
            outer_diameter_m: 0.045,
            inner_diameter_m: 0.0,
            material: None,
        });
        shaft.sections.push(shaft.sections[0]);
        let mut st = Study::new(shaft);
        st.bearings = [0.075, 0.825].map(|x| Support::lateral(x, 1e8)).to_vec();
        let r = evaluate(&st, None).expect("evaluates");
        let map = r.map.expect("map");
        let mut worst = 0.0f64;
        for p in [0, MAP_POINTS / 2, MAP_POINTS - 1] {
            let mut s = st.in_service().expect("bearings");
            for b in &mut s.supports {
                b.stiffness_n_per_m = map.stiffness_n_per_m[p];
            }
            // A mesh 5× finer stands for converged (its own error is below 1e-4 here).
            let (_, fine) = s
                .modes(BeamTheory::Timoshenko, MAP_MODES, 5 * MAP_ELEMENTS, &[])
                .expect("solves");
            for (m, row) in fine.iter().zip(&map.frequencies_hz) {
                let e = (row[p] - m.frequency_hz) / m.frequency_hz;
                worst = worst.max(e.abs());
            }
        }
        assert!(worst < 1e-3, "sweep mesh off converged by {worst}");
    }

    #[test]
    fn bad_ranges_are_named() {
        let mut st = Study::new(uniform(1.0, 0.02));
        st.running_speed_rpm = Some([3000.0, 100.0]);
        let e = evaluate(&st, None).expect_err("refused");
        assert!(e.contains("running speed"), "{e}");
        st.running_speed_rpm = None;
        st.bearings = vec![Support::lateral(2.0, 1e8)];
        let e = evaluate(&st, None).expect_err("refused");
        assert!(e.contains("bearing 1"), "{e}");
    }
}
