//! The shaft model against handbook values: Euler–Bernoulli frequency coefficients of slender
//! uniform beams (Blevins 1979, table 8-1, from memory; first values as in Thomson, Theory of Vibration, app. D), free-free node positions (same table),
//! mesh convergence, f ∝ D/L² for slender solid shafts (common practice), and the `tapgrid model`
//! command's file format and errors.

#![allow(clippy::unwrap_used, clippy::expect_used)]

use assert_cmd::Command;
use predicates::prelude::*;
use tapgrid::model::beam::{BeamTheory, Material, Section, Shaft, Support};
use tapgrid::model::run::converged_modes;

const L: f64 = 1.0;
const D: f64 = 0.02;

fn bar(d: f64, l: f64, supports: Vec<Support>) -> Shaft {
    Shaft {
        material: Material::STEEL,
        sections: vec![Section {
            length_m: l,
            outer_diameter_m: d,
            inner_diameter_m: 0.0,
            material: None,
        }],
        discs: vec![],
        supports,
    }
}

/// Equal lateral springs `k` at both ends of a bar of length `l`.
fn end_springs(k: f64, l: f64) -> Vec<Support> {
    [0.0, l].map(|x| Support::lateral(x, k)).to_vec()
}

/// f_n = λ_n² / (2π L²) · √(EI / ρA); for a solid circle EI/ρA = E D² / (16 ρ).
fn blevins_hz(lambda: f64, d: f64, l: f64) -> f64 {
    let m = Material::STEEL;
    lambda * lambda / (2.0 * std::f64::consts::PI * l * l)
        * (m.youngs_modulus_pa * d * d / (16.0 * m.density_kg_m3)).sqrt()
}

#[test]
fn free_free_coefficients_within_a_tenth_of_a_percent() {
    let c = converged_modes(&bar(D, L, vec![]), BeamTheory::EulerBernoulli, 5, &[]).unwrap();
    assert!(c.modes[0].rigid_body && c.modes[1].rigid_body);
    assert!(!c.modes[2].rigid_body);
    for (m, lambda) in c.modes[2..].iter().zip([4.730_04, 7.853_20, 10.995_6]) {
        let f = blevins_hz(lambda, D, L);
        assert!(
            (m.frequency_hz / f - 1.0).abs() < 1e-3,
            "{} vs {f}",
            m.frequency_hz
        );
    }
    // Mode 1's nodes at 0.2242 L and 0.7758 L.
    let m = &c.modes[2];
    let mut nodes = Vec::new();
    for k in 1..c.nodes_m.len() {
        let (a, b) = (m.displacement[k - 1], m.displacement[k]);
        if a * b < 0.0 {
            let t = a / (a - b);
            nodes.push(c.nodes_m[k - 1] + t * (c.nodes_m[k] - c.nodes_m[k - 1]));
        }
    }
    assert_eq!(nodes.len(), 2);
    assert!((nodes[0] / L - 0.2242).abs() < 5e-4, "{}", nodes[0]);
    assert!((nodes[1] / L - 0.7758).abs() < 5e-4, "{}", nodes[1]);
}

#[test]
fn pinned_pinned_coefficients_within_a_tenth_of_a_percent() {
    // Pins as supports far stiffer than the bar (k L³/EI ≈ 10⁸).
    let k = 1e11;
    let s = bar(D, L, end_springs(k, L));
    let c = converged_modes(&s, BeamTheory::EulerBernoulli, 3, &[]).unwrap();
    for (n, m) in c.modes.iter().enumerate() {
        let lambda = (n + 1) as f64 * std::f64::consts::PI;
        let f = blevins_hz(lambda, D, L);
        assert!(
            (m.frequency_hz / f - 1.0).abs() < 1e-3,
            "mode {}: {} vs {f}",
            n + 1,
            m.frequency_hz
        );
        assert!(!m.rigid_body);
    }
}

/// Clamped-free (cantilever), Blevins 1979 table 8-1: λ = 1.87510, 4.69409, 7.85476. The clamp
/// is a support stiff against both deflection and rotation (kL³/EI and k_θL/EI ≈ 6·10⁶, so
/// its own compliance shifts the frequencies by < 1e-6).
#[test]
fn clamped_free_coefficients_within_a_tenth_of_a_percent() {
    let clamp = Support {
        rotational_stiffness_n_m_per_rad: 1e10,
        ..Support::lateral(0.0, 1e10)
    };
    let c = converged_modes(&bar(D, L, vec![clamp]), BeamTheory::EulerBernoulli, 3, &[]).unwrap();
    for (m, lambda) in c.modes.iter().zip([1.875_104, 4.694_091, 7.854_757]) {
        let f = blevins_hz(lambda, D, L);
        assert!(
            (m.frequency_hz / f - 1.0).abs() < 1e-3,
            "{} vs {f}",
            m.frequency_hz
        );
        assert!(!m.rigid_body);
    }
    // The JSON key is optional and round-trips.
    let text = serde_json::to_string(&clamp).unwrap();
    assert!(text.contains("rotational_stiffness_n_m_per_rad"));
    let plain = serde_json::to_string(&Support::lateral(0.5, 1e8)).unwrap();
    assert!(!plain.contains("rotational"));
}

#[test]
fn frequency_scales_with_diameter_over_length_squared() {
    let f = |d: f64, l: f64| {
        converged_modes(&bar(d, l, vec![]), BeamTheory::EulerBernoulli, 3, &[])
            .unwrap()
            .modes[2]
            .frequency_hz
    };
    let f0 = f(D, L);
    assert!((f(2.0 * D, L) / f0 - 2.0).abs() < 1e-3);
    assert!((f(D, 2.0 * L) / f0 - 0.25).abs() < 1e-3);
    // Timoshenko is lower than Euler–Bernoulli, by more for a stubby shaft (shear, rotary inertia).
    let t = converged_modes(&bar(D, L, vec![]), BeamTheory::Timoshenko, 3, &[])
        .unwrap()
        .modes[2]
        .frequency_hz;
    assert!(t < f0 && t > 0.995 * f0);
}

#[test]
fn mesh_refinement_converges() {
    let s = bar(D, L, vec![]);
    let c = converged_modes(&s, BeamTheory::Timoshenko, 6, &[]).unwrap();
    assert!(c.last_change < 1e-5);
    let (_, fine) = s.modes(BeamTheory::Timoshenko, 6, 512, &[]).unwrap();
    for (a, b) in c.modes.iter().zip(&fine).skip(2) {
        assert!((a.frequency_hz / b.frequency_hz - 1.0).abs() < 1e-4);
    }
}

#[test]
fn model_command_writes_modes_json_with_station_values() {
    let dir = tempfile::tempdir().unwrap();
    let shaft = dir.path().join("shaft.json");
    std::fs::write(
        &shaft,
        r#"{"material":{"youngs_modulus_pa":210e9,"density_kg_m3":7850,"poisson_ratio":0.3},
           "sections":[{"length_m":1.0,"outer_diameter_m":0.02,"inner_diameter_m":0.0}],
           "discs":[],"supports":[]}"#,
    )
    .unwrap();
    let csv = dir.path().join("stations.csv");
    std::fs::write(&csv, "station,position_m\n1,0.0\n2,0.5\n3,1.0\n").unwrap();
    let out = dir.path().join("out");
    Command::cargo_bin("tapgrid")
        .unwrap()
        .arg("model")
        .arg(&shaft)
        .arg("--out")
        .arg(&out)
        .args(["--modes", "4"])
        .arg("--stations")
        .arg(&csv)
        .assert()
        .success()
        .stdout(predicate::str::contains("rigid body"));
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("modes.json")).unwrap()).unwrap();
    let modes = v["modes"].as_array().unwrap();
    assert_eq!(modes.len(), 4);
    assert_eq!(modes[0]["rigid_body"], true);
    assert_eq!(modes[2]["rigid_body"], false);
    let f = modes[2]["frequency_hz"].as_f64().unwrap();
    assert!((f / blevins_hz(4.730_04, D, L) - 1.0).abs() < 2e-3);
    let st = modes[2]["stations"].as_array().unwrap();
    assert_eq!(st.len(), 3);
    // Mode 1 of a free-free bar: ends in phase, middle opposite.
    let val = |i: usize| st[i]["value"].as_f64().unwrap();
    assert!(val(0) * val(2) > 0.0 && val(0) * val(1) < 0.0);
    assert!(modes[2]["shape"].as_array().unwrap().len() > 100);
    assert!(modes[2]["shape"][0]["position_m"].is_number());
}

#[test]
fn bad_geometry_is_a_clear_error() {
    let dir = tempfile::tempdir().unwrap();
    for (json, words) in [
        (
            r#"{"material":{"youngs_modulus_pa":210e9,"density_kg_m3":7850,"poisson_ratio":0.3},
               "sections":[{"length_m":0.0,"outer_diameter_m":0.02,"inner_diameter_m":0.0}]}"#,
            "length",
        ),
        (
            r#"{"material":{"youngs_modulus_pa":210e9,"density_kg_m3":7850,"poisson_ratio":0.3},
               "sections":[{"length_m":1.0,"outer_diameter_m":0.02,"inner_diameter_m":0.03}]}"#,
            "inner",
        ),
        (
            r#"{"material":{"youngs_modulus_pa":210e9,"density_kg_m3":7850,"poisson_ratio":0.3},
               "sections":[{"length_m":1.0,"outer_diameter_m":0.02,"inner_diameter_m":0.0}],
               "supports":[{"position_m":1.5,"stiffness_n_per_m":1e6}]}"#,
            "support",
        ),
    ] {
        let p = dir.path().join("bad.json");
        std::fs::write(&p, json).unwrap();
        Command::cargo_bin("tapgrid")
            .unwrap()
            .arg("model")
            .arg(&p)
            .arg("--out")
            .arg(dir.path().join("o"))
            .assert()
            .code(2)
            .stderr(predicate::str::contains("bad.json"))
            .stderr(predicate::str::contains(words));
    }
}

/// Uniform Euler–Bernoulli shaft on equal end springs, K* = kL³/EI (roots of the frequency equation, derived):
/// λ1, λ2 within 0.5 %.
#[test]
fn spring_support_table_within_half_a_percent() {
    let m = Material::STEEL;
    let ei = m.youngs_modulus_pa * std::f64::consts::PI / 64.0 * D.powi(4);
    for (kstar, l1, l2) in [
        (1.0, 1.184, 1.564),
        (10.0, 2.032, 2.767),
        (100.0, 2.877, 4.664),
        (1000.0, 3.111, 6.037),
    ] {
        let k = kstar * ei / L.powi(3);
        let s = bar(D, L, end_springs(k, L));
        let c = converged_modes(&s, BeamTheory::EulerBernoulli, 2, &[]).unwrap();
        for (mode, lambda) in c.modes.iter().zip([l1, l2]) {
            let f = blevins_hz(lambda, D, L);
            assert!(
                (mode.frequency_hz / f - 1.0).abs() < 5e-3,
                "K* {kstar}: {} vs {f}",
                mode.frequency_hz
            );
        }
    }
}

/// A test simulated from the model (tapgrid's simulator), fitted, and correlated back with the
/// same model: every mode paired, MAC > 0.99, frequency difference < 0.5 %.
#[test]
fn simulated_test_correlates_back_with_its_model() {
    use tapgrid::analysis::{self, Dataset};
    use tapgrid::modal::{FrfSet, ModalSettings, extract};
    let sc = tapgrid::sim::Scenario::pump_shaft();
    let dir = tempfile::tempdir().unwrap();
    sc.write(dir.path()).unwrap();
    let set = tapgrid::acquire::wavset::WavSet::scan(dir.path(), 0.1).unwrap();
    let setup = tapgrid::setup::Setup {
        reference_station: Some(sc.reference_station),
        ..sc.rig.matching_setup(sc.layout, [10.0, 3000.0])
    };
    let a = analysis::run(&Dataset::from_wavset(&set), &setup).unwrap();
    let fs = FrfSet::from_analysis(&a).unwrap();
    let m = extract(&fs, &ModalSettings::default()).unwrap();
    let test: Vec<(f64, Vec<f64>)> = m
        .modes
        .iter()
        .map(|x| (x.frequency_hz, x.shape.iter().map(|c| c.re).collect()))
        .collect();
    let model = converged_modes(&sc.shaft, BeamTheory::Timoshenko, 10, &m.positions_m).unwrap();
    let c = tapgrid::model::correlate::correlate(
        &m.positions_m,
        &test,
        &model.nodes_m,
        &model.modes,
        0.6,
    );
    assert_eq!(
        c.pairs.len(),
        test.len(),
        "unpaired test modes {:?}",
        c.unpaired_test
    );
    for p in &c.pairs {
        assert!(p.mac > 0.99, "{p:?}");
        assert!(p.difference_pct.abs() < 0.5, "{p:?}");
    }
}

/// The margin command on a case worked by hand from the API RP 684 rule (2nd ed. 2005, from
/// memory): a 60 Hz mode with ζ = 5 % (AF 10) is 18.0 % above a 3050 rpm maximum and needs 25.0 %.
#[test]
fn margin_command_by_hand() {
    Command::cargo_bin("tapgrid")
        .unwrap()
        .args(["margin", "--speed", "2950:3050", "--modes", "60:0.05"])
        .assert()
        .success()
        .stdout(predicate::str::contains("18.0"))
        .stdout(predicate::str::contains("25.0"))
        .stdout(predicate::str::contains("TOO CLOSE"))
        .stdout(predicate::str::contains("Advisory"));
}

/// The bundled demo session correlated with the shaft it was simulated from: five pairs, MAC 1.
#[test]
fn correlate_command_on_the_demo() {
    let dir = tempfile::tempdir().unwrap();
    let truth: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(
            std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
                .join("sample-sessions/pump-shaft/simulation-truth.json"),
        )
        .unwrap(),
    )
    .unwrap();
    let model = dir.path().join("pump.json");
    std::fs::write(&model, truth["scenario"]["shaft"].to_string()).unwrap();
    Command::cargo_bin("tapgrid")
        .unwrap()
        .arg("correlate")
        .arg(std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-sessions/pump-shaft"))
        .arg("--model")
        .arg(&model)
        .arg("--out")
        .arg(dir.path())
        .assert()
        .success();
    let c: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("correlation.json")).unwrap(),
    )
    .unwrap();
    let pairs = c["pairs"].as_array().unwrap();
    assert_eq!(pairs.len(), 5);
    for p in pairs {
        assert!(p["mac"].as_f64().unwrap() > 0.99);
        assert!(p["difference_pct"].as_f64().unwrap().abs() < 0.5);
    }
}

/// Exact Timoshenko values (derived from the Timoshenko frequency equation; Han, Benaroya & Wei,
/// JSV 225, 1999 give the method): pinned-pinned, D = 100 mm, L = 0.5 m, exact Timoshenko 776.25 /
/// 2779.21 / 5461.03 Hz; within 0.2 % (pins as very stiff springs).
#[test]
fn timoshenko_pinned_pinned_check_values() {
    let (d, l) = (0.1, 0.5);
    let k = 1e14;
    let s = bar(d, l, end_springs(k, l));
    let c = converged_modes(&s, BeamTheory::Timoshenko, 3, &[]).unwrap();
    for (m, f) in c.modes.iter().zip([776.25, 2779.21, 5461.03]) {
        assert!(
            (m.frequency_hz / f - 1.0).abs() < 2e-3,
            "{} vs {f}",
            m.frequency_hz
        );
    }
}

/// The shaft saved into a session (`tapgrid model --into`) is what `correlate` and `margin` use
/// without `--model`'s file; with bearings at the bar's ends far stiffer than the bar
/// (K* = kL³/EI ≈ 6·10⁸) the first installed critical speed is the Euler–Bernoulli pinned-pinned one (Blevins 1979,
/// λ₁ = π) within 0.2 % for this slender bar, and `margin` takes the running speed from the
/// session.
#[test]
fn a_model_saved_in_a_session_serves_correlate_and_margin() {
    let tmp = tempfile::tempdir().unwrap();
    let demo = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-sessions/pump-shaft");
    let dir = tmp.path().join("copy");
    tapgrid::session::Session::open(&demo)
        .unwrap()
        .save_as(&dir)
        .unwrap();
    let json = tmp.path().join("bar.json");
    let shaft = bar(D, L, vec![]);
    std::fs::write(&json, serde_json::to_string(&shaft).unwrap()).unwrap();
    Command::cargo_bin("tapgrid")
        .unwrap()
        .args(["model"])
        .arg(&json)
        .arg("--into")
        .arg(&dir)
        .assert()
        .success();
    let mut s = tapgrid::session::Session::open(&dir).unwrap();
    let st = s
        .manifest
        .model
        .as_mut()
        .expect("the session holds the model");
    assert_eq!(st.shaft, shaft);
    // The demo's service questions were kept; now put rigid bearings at the bar's ends.
    assert_eq!(st.running_speed_rpm, Some([2900.0, 3000.0]));
    st.bearings = end_springs(1e12, L);
    s.save().unwrap();
    let out = Command::cargo_bin("tapgrid")
        .unwrap()
        .args(["margin", "--model"])
        .arg(&dir)
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let text = String::from_utf8(out).unwrap();
    let first = text
        .lines()
        .find(|l| l.starts_with("model"))
        .expect("a model line");
    let rpm: f64 = first.split_whitespace().nth(3).unwrap().parse().unwrap();
    let want = 60.0 * blevins_hz(std::f64::consts::PI, D, L);
    assert!(((rpm - want) / want).abs() < 2e-3, "{rpm} vs {want}");
    assert!(text.contains("Advisory only"));
    Command::cargo_bin("tapgrid")
        .unwrap()
        .arg("correlate")
        .arg(&dir)
        .assert()
        .success()
        .stdout(predicate::str::contains("test  model"));
    // A WAV set folder is not a model.
    Command::cargo_bin("tapgrid")
        .unwrap()
        .args(["margin", "--speed", "100:200", "--model"])
        .arg(demo.parent().unwrap().join("pump-shaft-roving-sensor"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("not a tapgrid session"));
}

/// `tapgrid margin --model` on a shaft file with a study of its own (range, orders, rule) checks
/// the same lines as the study that the report and the window show: the study's order 1 only and
/// its caps, not the command's defaults. (A consistency check between two views; the rule itself
/// is checked by hand in `margin_command_by_hand`.)
#[test]
fn margin_command_uses_the_study_rule_and_orders() {
    let dir = tempfile::tempdir().unwrap();
    let mut study = tapgrid::model::study::Study::new(bar(D, L, vec![]));
    study.running_speed_rpm = Some([2900.0, 3100.0]);
    study.orders = vec![1];
    study.rule.below_cap_pct = 12.0;
    // The study's values travel in a session, so the command must take them from the model
    // and not from its own defaults.
    let session = dir.path().join("s");
    Command::cargo_bin("tapgrid")
        .unwrap()
        .args(["simulate", "--stations", "5", "--hits", "2", "--out"])
        .arg(dir.path().join("wav"))
        .assert()
        .success();
    Command::cargo_bin("tapgrid")
        .unwrap()
        .arg("import")
        .arg(dir.path().join("wav"))
        .arg("--session")
        .arg(&session)
        .assert()
        .success();
    let mut s = tapgrid::session::Session::open(&session).unwrap();
    s.manifest.model = Some(study.clone());
    s.save().unwrap();
    let out = Command::cargo_bin("tapgrid")
        .unwrap()
        .arg("margin")
        .arg("--model")
        .arg(&session)
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let text = String::from_utf8(out).unwrap();
    let expected = tapgrid::pipeline::study(&study, None).unwrap().margins;
    let rows: Vec<&str> = text.lines().filter(|l| l.starts_with("model")).collect();
    assert_eq!(rows.len(), expected.len(), "{text}");
    for (row, m) in rows.iter().zip(&expected) {
        let cols: Vec<&str> = row.split_whitespace().collect();
        assert_eq!(cols[2], "1", "order: {row}");
        let req: f64 = cols[7].parse().unwrap();
        assert!((req - m.check.required_pct).abs() < 0.06, "{row} vs {m:?}");
    }
}
