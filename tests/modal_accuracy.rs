//! Modal parameters from simulated tests and analytic FRFs, against the truth they came from and
//! against independent references (scipy.linalg.eig; Blevins' free-free beam shapes).

#![allow(clippy::unwrap_used, clippy::expect_used)]

mod common;

use std::collections::BTreeMap;

use tapgrid::Complex64;
use tapgrid::acquire::wav::SampleEncoding;
use tapgrid::acquire::wavset::{PositionSource, WavSet};
use tapgrid::analysis::{self, Analysis, Dataset, StationAnalysis};
use tapgrid::estimate::shape::{mac, mac_real};
use tapgrid::modal::{FrfSet, Method, ModalResult, ModalSettings, extract};
use tapgrid::model::beam::{Material, Section, Shaft, Support};
use tapgrid::setup::{Layout, Setup};
use tapgrid::signal::analyze_station;
use tapgrid::sim::{ModalModel, Pickup, Rig, Rng, Scenario, Truth, TruthMode, synthesize};

const TAU: f64 = 2.0 * std::f64::consts::PI;

fn setup_for(rig: &Rig, layout: Layout, reference: u32, band: [f64; 2]) -> Setup {
    Setup {
        reference_station: Some(reference),
        ..rig.matching_setup(layout, band)
    }
}

fn run_scenario(sc: &Scenario, band: [f64; 2], method: Method) -> (Truth, Analysis, ModalResult) {
    let dir = tempfile::tempdir().unwrap();
    let truth = sc.write(dir.path()).unwrap();
    let set = WavSet::scan(dir.path(), 0.1).unwrap();
    let setup = setup_for(&sc.rig, sc.layout, sc.reference_station, band);
    let a = analysis::run(&Dataset::from_wavset(&set), &setup).unwrap();
    let fs = FrfSet::from_analysis(&a).unwrap();
    let m = extract(
        &fs,
        &ModalSettings {
            method,
            ..ModalSettings::default()
        },
    )
    .unwrap();
    (truth, a, m)
}

/// Checks every truth mode inside the band; returns the number of spurious modes.
fn check_modes(
    truth: &Truth,
    m: &ModalResult,
    band: [f64; 2],
    mac_min: f64,
    damping: bool,
) -> usize {
    let inside: Vec<_> = truth
        .modes
        .iter()
        .filter(|t| t.frequency_hz > band[0] && t.frequency_hz < band[1])
        .collect();
    assert!(!inside.is_empty());
    let idx: Vec<usize> = m.stations.iter().map(|&s| s as usize - 1).collect();
    for t in &inside {
        let got = m
            .modes
            .iter()
            .min_by(|a, b| {
                (a.frequency_hz - t.frequency_hz)
                    .abs()
                    .total_cmp(&(b.frequency_hz - t.frequency_hz).abs())
            })
            .unwrap_or_else(|| panic!("no mode near {}", t.frequency_hz));
        let df = got.frequency_hz / t.frequency_hz - 1.0;
        assert!(
            df.abs() < 1e-3,
            "mode {:.2} Hz: frequency {:.3} ({:+.4} %)",
            t.frequency_hz,
            got.frequency_hz,
            100.0 * df
        );
        if damping {
            let z = got.damping_ratio.unwrap();
            assert!(
                (z / t.damping_ratio - 1.0).abs() < 0.10,
                "mode {:.2} Hz: ζ {z} vs {}",
                t.frequency_hz,
                t.damping_ratio
            );
        }
        let truth_shape: Vec<Complex64> = idx
            .iter()
            .map(|&i| Complex64::new(t.shape_unit[i], 0.0))
            .collect();
        let mc = mac(&got.shape, &truth_shape);
        assert!(mc >= mac_min, "mode {:.2} Hz: MAC {mc:.5}", t.frequency_hz);
    }
    m.modes.len() - inside.len()
}

fn pump(layout: Layout) -> Scenario {
    let mut sc = Scenario::pump_shaft();
    sc.set_layout(layout);
    sc.hits_per_station = 4;
    sc.rig.encoding = SampleEncoding::Int24;
    sc.seed = 11;
    sc
}

#[test]
fn roving_hammer_frequencies_damping_and_shapes() {
    // Targets: frequency 0.1 %, damping 10 %, MAC ≥ 0.995, at most one spurious mode per band;
    // a double hit and an overload are in the set and must stay out of the fit.
    let mut sc = pump(Layout::Hammer);
    sc.double_hits = vec![(3, 1)];
    sc.overloads = vec![(6, 2)];
    let band = [100.0, 3000.0];
    let (truth, a, m) = run_scenario(&sc, band, Method::Lscf);
    let rejected: usize = a
        .stations
        .iter()
        .map(|s| s.result.hits.iter().filter(|h| !h.accepted).count())
        .sum();
    assert_eq!(rejected, 2);
    assert_eq!(a.stations[2].result.frf.as_ref().unwrap().hits_averaged, 3);
    let spurious = check_modes(&truth, &m, band, 0.995, true);
    assert!(
        spurious <= 1,
        "{spurious} spurious modes: {:?}",
        m.modes.iter().map(|x| x.frequency_hz).collect::<Vec<_>>()
    );
    assert!(m.modes.iter().all(|x| x.mpc > 0.99));
    assert!(m.fit_error.iter().all(|e| *e < 0.05), "{:?}", m.fit_error);
    // Auto-MAC: distinct bending modes are far from parallel on this station grid.
    for i in 0..m.modes.len() {
        assert!((m.auto_mac[i][i] - 1.0).abs() < 1e-12);
    }
}

#[test]
fn peak_picking_gets_frequencies_and_shapes_and_warns_of_hidden_pairs() {
    let sc = pump(Layout::Hammer);
    let band = [100.0, 3000.0];
    let (truth, _, m) = run_scenario(&sc, band, Method::Peak);
    let spurious = check_modes(&truth, &m, band, 0.995, true);
    assert!(spurious <= 1);
    assert!(
        m.modes
            .iter()
            .all(|x| x.notes.iter().any(|n| n.contains("may hide two")))
    );
}

#[test]
fn roving_sensor_frequencies_and_shapes() {
    // Target MAC ≥ 0.98 in the roving-sensor layout; damping only from response auto-spectra.
    let mut sc = pump(Layout::Sensor);
    sc.stations_m = vec![0.0, 0.15, 0.3, 0.45, 0.6, 0.75, 0.9];
    sc.drive_station = 7;
    let band = [100.0, 3000.0];
    let (truth, _, m) = run_scenario(&sc, band, Method::Lscf);
    let spurious = check_modes(&truth, &m, band, 0.98, false);
    assert!(spurious <= 1);
    assert!(m.modes.iter().all(|x| x.method == Method::Peak));
    assert!(m.warnings.iter().any(|w| w.contains("antiresonances")));
}

#[test]
fn mains_hum_coherent_on_both_channels_is_not_a_mode() {
    let mut sc = pump(Layout::Hammer);
    sc.rig.hum_volts = 5e-3; // 25× the default: clearly visible lines at 50 and 150 Hz
    let band = [20.0, 3000.0];
    for method in [Method::Lscf, Method::Peak] {
        let (truth, _, m) = run_scenario(&sc, band, method);
        for md in &m.modes {
            let k = (md.frequency_hz / 50.0).round();
            assert!(
                (md.frequency_hz - 50.0 * k).abs() > 1.0 || k == 0.0,
                "{method:?}: hum at {} reported",
                md.frequency_hz
            );
        }
        check_modes(&truth, &m, [100.0, 3000.0], 0.99, false);
    }
}

/// An FrfSet from per-station records of a modal model (hammer roving, reference = DOF 0).
fn frfs_of(model: &ModalModel, stations: usize, band: [f64; 2], rig: &Rig) -> FrfSet {
    let setup = setup_for(rig, Layout::Hammer, 1, band);
    let imp = common::impacts(4, 0.3, 3.0, 150.0, 2e-4);
    let mut st = Vec::new();
    for j in 0..stations {
        let (a, b) = synthesize(
            model,
            Pickup::ForceAndResponse { response: 0 },
            j,
            &imp,
            12.5,
            rig,
            &mut Rng::new(j as u64 + 1),
        );
        let result = analyze_station(
            &a,
            &b,
            rig.sample_rate_hz,
            &setup,
            &BTreeMap::new(),
            &mut None,
        )
        .unwrap();
        st.push(StationAnalysis {
            station: j as u32 + 1,
            position_m: j as f64 * 0.1,
            position_source: PositionSource::Spacing,
            path: std::path::PathBuf::new(),
            result,
        });
    }
    FrfSet::from_analysis(&Analysis {
        setup,
        sample_rate_hz: rig.sample_rate_hz,
        stations: st,
        notes: vec![],
    })
    .unwrap()
}

#[test]
fn close_pair_point_eight_percent_apart_is_resolved_with_both_dampings() {
    // Two bending planes of a shaft with a keyway: the same shape along the shaft, 0.8 % apart,
    // seen through a measurement direction at 35° to the principal axes; a third mode nearby.
    let shape: Vec<f64> = (0..8)
        .map(|i| (std::f64::consts::PI * (i as f64 + 0.5) / 8.0).cos())
        .collect();
    let (c, s) = (35f64.to_radians().cos(), 35f64.to_radians().sin());
    let model = ModalModel {
        modes: vec![
            TruthMode {
                frequency_hz: 600.0,
                damping_ratio: 0.003,
                shape: shape.iter().map(|v| 0.4 * c * v).collect(),
            },
            TruthMode {
                frequency_hz: 604.8,
                damping_ratio: 0.005,
                shape: shape.iter().map(|v| 0.4 * s * v).collect(),
            },
            TruthMode {
                frequency_hz: 1450.0,
                damping_ratio: 0.004,
                shape: (0..8)
                    .map(|i| 0.4 * (std::f64::consts::PI * 2.0 * (i as f64 + 0.5) / 8.0).cos())
                    .collect(),
            },
        ],
    };
    let rig = Rig {
        sample_rate_hz: 16384,
        ..common::clean_rig(16384)
    };
    let rig = Rig {
        noise_volts: [3e-6, 3e-6],
        ..rig
    };
    let set = frfs_of(&model, 8, [300.0, 2000.0], &rig);
    let m = extract(&set, &ModalSettings::default()).unwrap();
    for t in &model.modes {
        let got = m
            .modes
            .iter()
            .min_by(|a, b| {
                (a.frequency_hz - t.frequency_hz)
                    .abs()
                    .total_cmp(&(b.frequency_hz - t.frequency_hz).abs())
            })
            .unwrap();
        assert!(
            (got.frequency_hz / t.frequency_hz - 1.0).abs() < 1e-3,
            "{} vs {}",
            got.frequency_hz,
            t.frequency_hz
        );
        let z = got.damping_ratio.unwrap();
        assert!(
            (z / t.damping_ratio - 1.0).abs() < 0.10,
            "{} Hz: ζ {z} vs {}",
            t.frequency_hz,
            t.damping_ratio
        );
    }
    let near: Vec<_> = m
        .modes
        .iter()
        .filter(|x| (x.frequency_hz - 602.0).abs() < 10.0)
        .collect();
    assert_eq!(
        near.len(),
        2,
        "{:?}",
        m.modes.iter().map(|x| x.frequency_hz).collect::<Vec<_>>()
    );
    assert!(
        near.iter()
            .all(|x| x.notes.iter().any(|n| n.contains("closely spaced")))
    );
}

#[test]
fn lscf_poles_of_a_three_dof_system_match_scipy_eig() {
    // Analytic accelerance of a non-proportionally damped 3-DOF system (no windows, no noise);
    // poles from scipy.linalg.eigvals of the state matrix (fixture records the SciPy version).
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/scipy_eig_3dof.json"
    ))
    .unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    let mat = |k: &str| {
        let rows: Vec<Vec<f64>> = serde_json::from_value(v[k].clone()).unwrap();
        nalgebra::DMatrix::from_fn(3, 3, |i, j| rows[i][j])
    };
    let model = common::MatrixModel {
        m: mat("m"),
        c: mat("c"),
        k: mat("k"),
    };
    let re: Vec<f64> = serde_json::from_value(v["poles_re"].clone()).unwrap();
    let im: Vec<f64> = serde_json::from_value(v["poles_im"].clone()).unwrap();
    let freq: Vec<f64> = (0..1800).map(|k| 50.0 + 0.5 * k as f64).collect();
    let h: Vec<Vec<Complex64>> = (0..3)
        .map(|o| {
            freq.iter()
                .map(|&f| tapgrid::sim::FrfModel::accelerance(&model, o, 0, TAU * f))
                .collect()
        })
        .collect();
    let n = freq.len();
    let set = FrfSet {
        layout: Layout::Hammer,
        freq_hz: freq,
        stations: vec![1, 2, 3],
        positions_m: vec![0.0, 0.1, 0.2],
        h,
        coherence: vec![vec![1.0; n]; 3],
        hits: vec![5; 3],
        gaa: vec![vec![1.0; n]; 3],
        gbb: vec![vec![1.0; n]; 3],
        exp_tau_s: f64::INFINITY,
        reference: Some(0),
        df_hz: 0.5,
        usable_hi_hz: vec![f64::INFINITY; 3],
    };
    // The global LSCF alone is exact on noise-free data; the local refinement (on by default)
    // trades a few parts per million for robustness on measured data.
    let lscf_only = ModalSettings {
        max_order: 24,
        refine_poles: false,
        ..ModalSettings::default()
    };
    let refined = extract(
        &set,
        &ModalSettings {
            max_order: 24,
            ..ModalSettings::default()
        },
    )
    .unwrap();
    let m = extract(&set, &lscf_only).unwrap();
    for (a, b) in refined.modes.iter().zip(&m.modes) {
        assert!((a.frequency_hz / b.frequency_hz - 1.0).abs() < 1e-4);
        assert!((a.damping_ratio.unwrap() / b.damping_ratio.unwrap() - 1.0).abs() < 1e-2);
    }
    assert_eq!(
        m.modes.len(),
        3,
        "{:?}",
        m.modes.iter().map(|x| x.frequency_hz).collect::<Vec<_>>()
    );
    for (md, (r, i)) in m.modes.iter().zip(re.iter().zip(&im)) {
        let lam = Complex64::new(*r, *i);
        let (f, z) = (lam.norm() / TAU, -lam.re / lam.norm());
        assert!(
            (md.frequency_hz / f - 1.0).abs() < 1e-6,
            "{} vs {f}",
            md.frequency_hz
        );
        assert!(
            (md.damping_ratio.unwrap() / z - 1.0).abs() < 1e-4,
            "{:?} vs {z}",
            md.damping_ratio
        );
    }
}

#[test]
fn free_free_beam_shapes_are_recovered_from_a_simulated_test() {
    // Uniform steel shaft, L = 1 m, D = 50 mm, on very soft cords. Blevins 1979 (from memory; first
    // values match Thomson, Theory of Vibration, app. D): y = cosh(λx/L) + cos(λx/L) −
    // σ(sinh(λx/L) + sin(λx/L)); Timoshenko values 228.7 / 622.9 / 1200.9 / 1943.5 Hz computed
    // with Cowper's 1966 shear coefficient (derived).
    let mut sc = Scenario::pump_shaft();
    sc.shaft = Shaft {
        material: Material::STEEL,
        sections: vec![Section {
            length_m: 1.0,
            outer_diameter_m: 0.05,
            inner_diameter_m: 0.0,
            material: None,
        }],
        discs: vec![],
        supports: vec![
            Support::lateral(0.2242, 300.0),
            Support::lateral(0.7758, 300.0),
        ],
    };
    sc.stations_m = (0..11).map(|i| i as f64 * 0.1).collect();
    sc.hits_per_station = 3;
    sc.rig.encoding = SampleEncoding::Int24;
    let band = [100.0, 2200.0];
    let (_, _, m) = run_scenario(&sc, band, Method::Lscf);
    let lambdas = [
        (4.73004074, 0.982502215),
        (7.85320462, 1.000777312),
        (10.99560784, 0.999966450),
        (14.13716549, 1.000001450),
    ];
    let want_hz = [228.7, 622.9, 1200.9, 1943.5];
    assert_eq!(
        m.modes.len(),
        4,
        "{:?}",
        m.modes.iter().map(|x| x.frequency_hz).collect::<Vec<_>>()
    );
    for ((md, (l, s)), f) in m.modes.iter().zip(lambdas).zip(want_hz) {
        assert!(
            (md.frequency_hz / f - 1.0).abs() < 2e-3,
            "{} vs {f}",
            md.frequency_hz
        );
        let analytic: Vec<f64> = sc
            .stations_m
            .iter()
            .map(|x| (l * x).cosh() + (l * x).cos() - s * ((l * x).sinh() + (l * x).sin()))
            .collect();
        let got: Vec<f64> = md.shape.iter().map(|c| c.re).collect();
        let mc = mac_real(&got, &analytic);
        assert!(mc > 0.995, "mode at {f} Hz: MAC {mc}");
    }
}

#[test]
fn carried_over_ringing_of_very_light_damping_is_removed() {
    // ζ = 0.05 % with taps 1.5 s apart: the lowest mode still rings at 25 % of its amplitude when
    // the next tap lands (σ = ζω = 0.91 /s), and at the record end (Trethewey & Cafeo 1992: T ≥ 6/(ζω) =
    // 6.6 s would be needed without a window). Through the exponential window, its correction and
    // the removal of the carried-over ringing, every mode's damping must come out within 10 %, and
    // the removal must make the hits agree better (higher coherence).
    let mut sc = pump(Layout::Hammer);
    sc.stations_m = (0..8).map(|i| i as f64 * 0.9 / 7.0).collect();
    sc.drive_station = 8;
    sc.hits_per_station = 5;
    sc.hit_interval_s = 1.5;
    sc.damping_ratio = 0.0005;
    let dir = tempfile::tempdir().unwrap();
    let truth = sc.write(dir.path()).unwrap();
    let set = WavSet::scan(dir.path(), 0.1).unwrap();
    let band = [50.0, 3000.0];
    let run = |remove: bool| {
        let setup = Setup {
            remove_carryover: remove,
            ..setup_for(&sc.rig, Layout::Hammer, 1, band)
        };
        analysis::run(&Dataset::from_wavset(&set), &setup).unwrap()
    };
    let (with, without) = (run(true), run(false));
    let removed = |a: &Analysis| {
        a.stations
            .iter()
            .flat_map(|s| &s.result.hits)
            .filter(|h| h.ringing_removed)
            .count()
    };
    assert_eq!(removed(&without), 0);
    assert_eq!(
        removed(&with),
        8 * 4,
        "every hit after the first of each station carries ringing"
    );
    let good_share = |a: &Analysis| {
        let (mut good, mut all) = (0usize, 0usize);
        for s in &a.stations {
            let c = &s.result.frf.as_ref().unwrap().coherence;
            good += c.iter().filter(|&&g| g >= 0.9).count();
            all += c.len();
        }
        good as f64 / all as f64
    };
    assert!(
        good_share(&with) > good_share(&without) + 0.01,
        "{} vs {}",
        good_share(&with),
        good_share(&without)
    );
    let m = extract(
        &FrfSet::from_analysis(&with).unwrap(),
        &ModalSettings::default(),
    )
    .unwrap();
    let spurious = check_modes(&truth, &m, band, 0.995, true);
    assert!(spurious <= 1);
}

/// Forty stations at 16 bits analysed with the default setup (no sensitivities, automatic band
/// 10 Hz … 5 kHz): exactly the simulated modes inside the band are reported, no spurious one.
/// Truth: the simulator's own modal model (truth.json).
#[test]
fn forty_stations_default_setup_reports_only_real_modes() {
    let mut sc = Scenario::pump_shaft();
    let l = sc.shaft.length_m();
    sc.stations_m = (0..40).map(|i| l * i as f64 / 39.0).collect();
    let dir = tempfile::tempdir().unwrap();
    let truth = sc.write(dir.path()).unwrap();
    let set = WavSet::scan(dir.path(), 0.1).unwrap();
    let a = analysis::run(&Dataset::from_wavset(&set), &Setup::default()).unwrap();
    let fs = FrfSet::from_analysis(&a).unwrap();
    let m = extract(&fs, &ModalSettings::default()).unwrap();
    let [lo, hi] = [fs.freq_hz[0], *fs.freq_hz.last().unwrap()];
    let expected: Vec<f64> = truth
        .modes
        .iter()
        .map(|t| t.frequency_hz)
        .filter(|&f| f > lo + 50.0 && f < hi - 50.0)
        .collect();
    let got: Vec<f64> = m.modes.iter().map(|x| x.frequency_hz).collect();
    assert_eq!(
        got.len(),
        expected.len(),
        "got {got:?}, expected {expected:?}"
    );
    for (g, e) in got.iter().zip(&expected) {
        assert!((g / e - 1.0).abs() < 1e-3, "{g} vs {e}");
    }
}
