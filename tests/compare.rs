//! `tapgrid compare` on simulated tests with known truth: a "repaired" shaft (its middle
//! section turned down) against the original, and a test on another station grid. The
//! frequency changes must be the simulated truth's, the shapes pair by MAC (Allemang & Brown
//! 1982) — by position when the grids differ.

#![allow(clippy::unwrap_used, clippy::expect_used)]

use std::path::Path;

use assert_cmd::Command;
use predicates::prelude::*;
use tapgrid::analysis::Dataset;
use tapgrid::modal::{FrfSet, ModalResult, ModalSettings};
use tapgrid::pipeline::compare::compare;
use tapgrid::setup::Layout;
use tapgrid::sim::{Scenario, Truth};

fn fitted(dir: &Path, sc: &Scenario) -> (FrfSet, ModalResult) {
    let set = tapgrid::acquire::wavset::WavSet::scan(dir, 0.1).unwrap();
    let data = Dataset::from_wavset(&set);
    let mut setup = sc.rig.matching_setup(Layout::Hammer, [100.0, 3000.0]);
    setup.reference_station = Some(sc.reference_station);
    let a = tapgrid::analysis::run(&data, &setup).unwrap();
    let m = tapgrid::pipeline::fit(&a, &ModalSettings::default()).unwrap();
    (FrfSet::from_analysis(&a).unwrap(), m)
}

fn in_band(t: &Truth) -> Vec<f64> {
    t.modes
        .iter()
        .map(|m| m.frequency_hz)
        .filter(|f| (100.0..3000.0).contains(f))
        .collect()
}

/// The middle section turned from 45 to 44 mm: every mode pairs with its partner (MAC ≥ 0.99),
/// and each frequency change is the simulated truth's within 0.03 percentage points; the FRFs
/// differ station by station.
#[test]
fn a_repaired_shaft_pairs_with_the_original_and_shows_the_true_shifts() {
    let t = tempfile::tempdir().unwrap();
    let before = Scenario::default();
    let mut after = Scenario {
        seed: before.seed + 5,
        ..Default::default()
    };
    after.shaft.sections[1].outer_diameter_m = 0.044;
    let tb = before.write(&t.path().join("before")).unwrap();
    let ta = after.write(&t.path().join("after")).unwrap();
    let (sb, mb) = fitted(&t.path().join("before"), &before);
    let (sa, ma) = fitted(&t.path().join("after"), &after);
    let c = compare(&sb, &mb, &sa, &ma, 0.6);
    let (fb, fa) = (in_band(&tb), in_band(&ta));
    assert_eq!(c.pairs.len(), fb.len(), "{c:?}");
    for (p, (x, y)) in c.pairs.iter().zip(fb.iter().zip(&fa)) {
        let truth = 100.0 * (y - x) / x;
        assert!(p.mac >= 0.99, "{p:?}");
        assert!((p.difference_pct - truth).abs() < 0.03, "{p:?} vs {truth}");
        assert!(p.difference_pct < 0.0);
    }
    assert_eq!(c.stations.len(), 10);
    assert!(c.stations.iter().all(|s| s.median_db.is_some()));
}

/// The same part tested on 13 stations 75 mm apart against the 10-station grid: the second
/// test's shapes are read at the first's positions; the modes pair one to one with MAC ≥ 0.97
/// (linear interpolation between stations), frequencies within 0.05 %; stations at the same
/// place (0, 0.3, 0.6, 0.9 m) are matched.
#[test]
fn different_grids_are_compared_by_position() {
    let t = tempfile::tempdir().unwrap();
    let a = Scenario::default();
    let b = Scenario {
        stations_m: (0..13).map(|i| i as f64 * 0.075).collect(),
        seed: a.seed + 9,
        ..Default::default()
    };
    a.write(&t.path().join("a")).unwrap();
    b.write(&t.path().join("b")).unwrap();
    let (sa, ma) = fitted(&t.path().join("a"), &a);
    let (sb, mb) = fitted(&t.path().join("b"), &b);
    let c = compare(&sa, &ma, &sb, &mb, 0.6);
    assert_eq!(c.pairs.len(), ma.modes.len(), "{c:?}");
    for p in &c.pairs {
        assert_eq!(p.a, p.b);
        assert!(p.mac >= 0.97, "{p:?}");
        assert!(p.difference_pct.abs() < 0.05, "{p:?}");
    }
    let at: Vec<f64> = c.stations.iter().map(|s| s.position_m).collect();
    for x in [0.0, 0.3, 0.6, 0.9] {
        assert!(at.iter().any(|y| (y - x).abs() < 1e-9), "{at:?}");
    }
}

#[test]
fn the_command_prints_the_pairs_and_writes_compare_json() {
    let t = tempfile::tempdir().unwrap();
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-sessions/pump-shaft");
    Command::cargo_bin("tapgrid")
        .unwrap()
        .arg("compare")
        .arg(&demo)
        .arg(&demo)
        .arg("--out")
        .arg(t.path())
        .assert()
        .success()
        .stdout(predicate::str::contains("291.07       291.07"));
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(t.path().join("compare.json")).unwrap())
            .unwrap();
    assert_eq!(v["pairs"].as_array().unwrap().len(), 5);
    assert_eq!(v["pairs"][0]["mac"].as_f64().unwrap(), 1.0);
}
