//! `tapgrid check` and the physics checks against the facts they rest on (field notes §2):
//! Im(accelerance) > 0 at a driving point (e^{+jωt}), alternating resonances and antiresonances,
//! the free-free mass line 1/m + e²/J (4/m at an end of a uniform shaft, 1/m at its centre),
//! Maxwell–Betti reciprocity (Ewins 2000), linearity between force levels (ISO 7626-5, from
//! memory) — on tests made by the simulator with known truth.

#![allow(clippy::unwrap_used, clippy::expect_used)]

use std::path::Path;

use assert_cmd::Command;
use predicates::prelude::*;
use tapgrid::analysis::{Analysis, Dataset};
use tapgrid::modal::{FrfSet, ModalResult, ModalSettings};
use tapgrid::model::beam::{Material, Section, Shaft};
use tapgrid::pipeline::checks::{self, Check};
use tapgrid::setup::{Layout, Setup};
use tapgrid::sim::Scenario;

fn analyse(dir: &Path, setup: &Setup) -> (Dataset, Analysis, FrfSet, ModalResult) {
    let set = tapgrid::acquire::wavset::WavSet::scan(dir, 0.1).unwrap();
    let data = Dataset::from_wavset(&set);
    let a = tapgrid::analysis::run(&data, setup).unwrap();
    let frfs = FrfSet::from_analysis(&a).unwrap();
    let m = tapgrid::pipeline::fit(&a, &ModalSettings::default()).unwrap();
    (data, a, frfs, m)
}

fn setup_for(sc: &Scenario) -> Setup {
    let mut s = sc.rig.matching_setup(Layout::Hammer, [10.0, 3000.0]);
    s.reference_station = Some(sc.reference_station);
    s
}

fn find<'a>(c: &'a [Check], name: &str) -> &'a Check {
    c.iter().find(|c| c.name == name).unwrap()
}

/// The simulated pump shaft with the accelerometer at station 1 and station 1 tapped: its FRF
/// is a driving point, antiresonances separate the modes, and the mass line below the first
/// bending mode is the model's within 10 % (the simulator uses the same shaft). Flipping every
/// FRF's sign (an inverted channel) fails the sign check with the word "polarity"; naming
/// another station as the reference fails it as "not a driving point".
#[test]
fn a_driving_point_passes_and_an_inverted_channel_or_wrong_reference_fails() {
    let t = tempfile::tempdir().unwrap();
    let sc = Scenario::default();
    sc.write(t.path()).unwrap();
    let (data, a, set, m) = analyse(t.path(), &setup_for(&sc));
    let c = checks::physics(&data, &a, &set, &m, Some(&sc.shaft), None);
    print!("{}", checks::checks_text(&c));
    assert_eq!(find(&c, "driving_point_sign").passed, Some(true));
    assert!(find(&c, "driving_point_sign").value.unwrap() > 0.95);
    assert_eq!(
        find(&c, "resonance_antiresonance_alternation").passed,
        Some(true)
    );
    let ml = find(&c, "mass_line");
    assert_eq!(ml.passed, Some(true), "{}", ml.words);
    assert!((ml.value.unwrap() - 1.0).abs() < 0.1, "{}", ml.words);
    assert_eq!(find(&c, "spatial_aliasing").passed, Some(true));
    assert_eq!(find(&c, "reciprocity").passed, None);

    let mut flipped = set.clone();
    for h in &mut flipped.h {
        for v in h.iter_mut() {
            *v = -*v;
        }
    }
    let d = checks::driving_point_sign(&flipped, &m);
    assert_eq!(d.passed, Some(false));
    assert!(d.words.contains("polarity"), "{}", d.words);

    let mut wrong = set.clone();
    wrong.reference = wrong.stations.iter().position(|&s| s == 5);
    let d = checks::driving_point_sign(&wrong, &m);
    let alt = checks::alternation(&wrong, &m);
    assert!(
        d.passed == Some(false) || alt.passed == Some(false),
        "{} / {}",
        d.words,
        alt.words
    );
}

/// Mass line of a uniform free shaft: 4/m at an end and 1/m at the centre (field notes §2;
/// rotary inertia of the section changes J by (D/L)²·3/4, under 0.2 % here).
#[test]
fn the_mass_line_of_a_uniform_shaft_is_4_over_m_at_an_end() {
    let (l, d) = (1.0, 0.04);
    let shaft = Shaft {
        material: Material::STEEL,
        sections: vec![Section {
            length_m: l,
            outer_diameter_m: d,
            inner_diameter_m: 0.0,
            material: None,
        }],
        discs: Vec::new(),
        supports: Vec::new(),
    };
    let m = 7850.0 * std::f64::consts::PI * d * d / 4.0 * l;
    let end = checks::model_mass_line(&shaft, 0.0).unwrap();
    let mid = checks::model_mass_line(&shaft, 0.5 * l).unwrap();
    assert!((end * m / 4.0 - 1.0).abs() < 2e-3, "{}", end * m);
    assert!((mid * m - 1.0).abs() < 2e-3, "{}", mid * m);
}

/// Two simulated tests of one part, the accelerometer at station 1 in the first and at station
/// 6 in the second: H(1←6) of the first equals H(6←1) of the second (Maxwell–Betti) within
/// 1 dB at the median coherent line; a second test read with its accelerometer's sensitivity
/// entered twice too high is 6 dB off and fails.
#[test]
fn reciprocity_holds_between_two_references_and_catches_a_sensitivity_slip() {
    let t = tempfile::tempdir().unwrap();
    let sc1 = Scenario::default();
    let sc2 = Scenario {
        reference_station: 6,
        seed: sc1.seed + 17,
        ..Default::default()
    };
    sc1.write(&t.path().join("a")).unwrap();
    sc2.write(&t.path().join("b")).unwrap();
    let (_, _, a, _) = analyse(&t.path().join("a"), &setup_for(&sc1));
    let (_, _, b, _) = analyse(&t.path().join("b"), &setup_for(&sc2));
    let r = checks::reciprocity(&a, &b);
    assert_eq!(r.passed, Some(true), "{}", r.words);
    assert!(r.value.unwrap() < 0.5, "{}", r.words);
    let mut slip = setup_for(&sc2);
    slip.channel_b.sensitivity.mv_per_unit *= 2.0;
    let (_, _, b2, _) = analyse(&t.path().join("b"), &slip);
    let r = checks::reciprocity(&a, &b2);
    assert_eq!(r.passed, Some(false), "{}", r.words);
    assert!((r.value.unwrap() - 6.02).abs() < 0.5, "{}", r.words);
}

/// A station tapped at two force levels (one hit at a twelfth of the others, kept by lowering
/// the weak-hit limit): the simulated part is linear, so the two levels' FRFs agree within 1 dB.
#[test]
fn linearity_is_judged_where_a_station_has_two_force_levels() {
    let t = tempfile::tempdir().unwrap();
    let sc = Scenario {
        hits_per_station: 4,
        weak_hits: vec![(4, 1)],
        ..Default::default()
    };
    sc.write(t.path()).unwrap();
    let mut setup = setup_for(&sc);
    setup.quality.weak_fraction = 0.01;
    let (data, a, _, _) = analyse(t.path(), &setup);
    let c = checks::linearity(&data, &a);
    assert_eq!(c.passed, Some(true), "{}", c.words);
    assert!(c.words.contains("station 4"), "{}", c.words);
}

#[test]
fn the_command_prints_every_check_and_writes_checks_json() {
    let t = tempfile::tempdir().unwrap();
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-sessions/pump-shaft");
    Command::cargo_bin("tapgrid")
        .unwrap()
        .arg("check")
        .arg(&demo)
        .arg("--out")
        .arg(t.path())
        .assert()
        .success()
        .stdout(predicate::str::contains("ok      driving_point_sign"))
        .stdout(predicate::str::contains("mass_line"));
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(t.path().join("checks.json")).unwrap())
            .unwrap();
    assert_eq!(v["checks"].as_array().unwrap().len(), 8);
}

/// Roving-sensor layout: where the roving accelerometer sits at the reference's station the
/// transmissibility is +1 (the same motion, field notes §4); an inverted roving sensor reads −1
/// and fails with the word "polarity".
#[test]
fn a_roving_sensor_at_the_reference_reads_plus_one_and_an_inverted_one_fails() {
    let t = tempfile::tempdir().unwrap();
    let mut sc = Scenario::default();
    sc.set_layout(Layout::Sensor);
    sc.write(t.path()).unwrap();
    let mut setup = sc.rig.matching_setup(Layout::Sensor, [10.0, 3000.0]);
    setup.reference_station = Some(sc.reference_station);
    let set = tapgrid::acquire::wavset::WavSet::scan(t.path(), 0.1).unwrap();
    let data = Dataset::from_wavset(&set);
    let a = tapgrid::analysis::run(&data, &setup).unwrap();
    let frfs = FrfSet::from_analysis(&a).unwrap();
    let c = checks::sensor_polarity(&frfs);
    assert_eq!(c.passed, Some(true), "{}", c.words);
    assert!((c.value.unwrap() - 1.0).abs() < 0.05, "{}", c.words);
    let mut flipped = frfs.clone();
    for h in &mut flipped.h {
        for v in h.iter_mut() {
            *v = -*v;
        }
    }
    let c = checks::sensor_polarity(&flipped);
    assert_eq!(c.passed, Some(false));
    assert!(c.words.contains("polarity"), "{}", c.words);
}
