//! `tapgrid plan` and the planning core against published values: free-free node positions
//! (field notes §5, from Blevins' beam tables), the half-sine pulse's spectrum (its Fourier
//! transform, a textbook result), the record-length rule of Trethewey & Cafeo (1992) and the
//! auto-MAC criterion the plan is built on.

#![allow(clippy::unwrap_used, clippy::expect_used)]

use assert_cmd::Command;
use predicates::prelude::*;
use tapgrid::model::beam::{Material, Section, Shaft};
use tapgrid::model::plan::{PlanOptions, plan};

fn rod(length: f64, diameter: f64) -> Shaft {
    Shaft {
        material: Material::STEEL,
        sections: vec![Section {
            length_m: length,
            outer_diameter_m: diameter,
            inner_diameter_m: 0.0,
            material: None,
        }],
        discs: Vec::new(),
        supports: Vec::new(),
    }
}

/// Free-free nodes: mode 1 at 0.2242L and 0.7758L, mode 2 at 0.1321L, 0.5L and 0.8679L (field
/// notes §5); the Timoshenko model of a slender rod (L/D = 50) sits within 0.002L of them. Its
/// frequencies follow f = λ²D√(E/ρ)/(8πL²), λ = 4.73004, 7.85320 (field notes §5), within 0.5 %
/// (shear and rotary inertia lower them by about 0.1 % and 0.3 % here).
#[test]
fn free_free_nodes_and_frequencies_match_the_beam_tables() {
    for (length, d) in [(1.0, 0.02), (0.6, 0.012), (2.4, 0.048)] {
        let p = plan(
            &rod(length, d),
            &PlanOptions {
                band_hz: [
                    1.0,
                    1.05 * 7.8532f64.powi(2) * d * (210e9f64 / 7850.0).sqrt()
                        / (8.0 * std::f64::consts::PI * length * length),
                ],
                ..PlanOptions::default()
            },
        )
        .unwrap();
        assert!(p.free_free);
        assert_eq!(p.modes.len(), 2, "{:?}", p.modes);
        let expect = [vec![0.2242, 0.7758], vec![0.1321, 0.5, 0.8679]];
        for (m, e) in p.modes.iter().zip(&expect) {
            assert_eq!(m.nodes_m.len(), e.len());
            for (x, r) in m.nodes_m.iter().zip(e) {
                assert!((x / length - r).abs() < 2e-3, "{x} vs {r}L");
            }
        }
        for (m, lambda) in p.modes.iter().zip([4.73004074f64, 7.85320462]) {
            let eb = lambda.powi(2) * d * (210e9f64 / 7850.0).sqrt()
                / (8.0 * std::f64::consts::PI * length * length);
            assert!(
                (m.frequency_hz / eb - 1.0).abs() < 5e-3,
                "{} vs {eb}",
                m.frequency_hz
            );
        }
        // Hang it at the first mode's nodes.
        assert_eq!(p.suspension_m.len(), 2);
        assert!((p.suspension_m[0] / length - 0.2242).abs() < 2e-3);
        // A free-free end is an antinode of every bending mode (field notes §4): the best
        // reference places are the ends.
        let mut best = p.reference.best_m.clone();
        best.truncate(2);
        best.sort_by(f64::total_cmp);
        assert!(
            best[0] < 0.01 * length && best[1] > 0.99 * length,
            "{best:?}"
        );
    }
}

/// The half-sine force pulse of duration T has |F(f)|/|F(0)| = |cos(πfT)| / |1 − (2fT)²|
/// (its Fourier transform). The plan's contact-time limits put the band's top at −10 dB and
/// −20 dB of that, and the first null (f = 1.5/T) at the top for the third value.
#[test]
fn hammer_limits_follow_the_half_sine_spectrum() {
    let level_db = |f: f64, t: f64| {
        let x = f * t;
        20.0 * ((std::f64::consts::PI * x).cos().abs() / (1.0 - 4.0 * x * x).abs()).log10()
    };
    for hi in [800.0, 2000.0, 5000.0] {
        let p = plan(
            &rod(1.0, 0.03),
            &PlanOptions {
                band_hz: [10.0, hi],
                ..PlanOptions::default()
            },
        )
        .unwrap();
        let h = &p.hammer;
        assert!((level_db(hi, h.max_contact_s_10db) + 10.0).abs() < 0.3);
        assert!((level_db(hi, h.max_contact_s_20db) + 20.0).abs() < 0.6);
        assert!(level_db(hi, h.null_at_band_top_s) < -60.0);
    }
}

/// Record length: T ≥ 6/(ζω_n) of the lowest in-band mode (Trethewey & Cafeo 1992) and five
/// lines in its half-power band 2ζf_n (common practice); the samples are the fewest with no
/// prime factor above 5 that hold it.
#[test]
fn record_length_follows_the_decay_and_resolution_rules() {
    let p = plan(
        &rod(1.0, 0.025),
        &PlanOptions {
            band_hz: [20.0, 1000.0],
            damping_ratio: 0.001,
            sample_rate_hz: 48_000.0,
            ..PlanOptions::default()
        },
    )
    .unwrap();
    let f1 = p.modes[0].frequency_hz;
    let decay = 6.0 / (0.001 * 2.0 * std::f64::consts::PI * f1);
    let lines = 5.0 / (2.0 * 0.001 * f1);
    assert!((p.record.decay_s - decay).abs() < 1e-9);
    assert!((p.record.resolution_s - lines).abs() < 1e-9);
    assert!(p.record.samples as f64 >= lines * 48_000.0);
    let mut m = p.record.samples;
    for k in [2, 3, 5] {
        while m.is_multiple_of(k) {
            m /= k;
        }
    }
    assert_eq!(m, 1);
}

/// The station counts meet their definitions: on the recommended grid the in-band modes'
/// auto-MAC stays below 0.5 off the diagonal (the plan's stated criterion, common practice) and
/// every lobe between neighbouring nodes holds two stations; one station fewer than the minimum
/// breaks the criterion and is warned about.
#[test]
fn station_counts_meet_the_auto_mac_criterion() {
    let shaft = rod(1.2, 0.03);
    let o = PlanOptions {
        band_hz: [20.0, 3000.0],
        ..PlanOptions::default()
    };
    let p = plan(&shaft, &o).unwrap();
    assert!(p.modes.len() >= 4);
    let st = &p.stations;
    assert!(!st.given && st.count == st.recommended_count);
    assert!(st.max_off_diagonal_mac < 0.5);
    let spacing = p.length_m / (st.count - 1) as f64;
    for m in &p.modes {
        for w in m.nodes_m.windows(2) {
            let inside = st
                .positions_m
                .iter()
                .filter(|&&x| x > w[0] && x < w[1])
                .count();
            assert!(inside >= 2, "lobe {w:?}, spacing {spacing}");
        }
    }
    let fewer = plan(
        &shaft,
        &PlanOptions {
            stations: Some(st.minimum_count - 1),
            ..o.clone()
        },
    )
    .unwrap();
    assert!(!fewer.warnings.is_empty(), "{:?}", fewer.stations);
    let enough = plan(
        &shaft,
        &PlanOptions {
            stations: Some(st.minimum_count),
            ..o
        },
    )
    .unwrap();
    assert!(enough.stations.max_off_diagonal_mac < 0.5);
}

#[test]
fn the_command_prints_the_plan_and_writes_plan_json() {
    let t = tempfile::tempdir().unwrap();
    Command::cargo_bin("tapgrid")
        .unwrap()
        .args([
            "plan",
            "--length",
            "1.0",
            "--diameter",
            "0.025",
            "--band",
            "20:2000",
            "--out",
        ])
        .arg(t.path())
        .assert()
        .success()
        .stdout(predicate::str::contains("nodes at 0.224, 0.776 m"))
        .stdout(predicate::str::contains("Suspension"))
        .stdout(predicate::str::contains("locked out"));
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(t.path().join("plan.json")).unwrap())
            .unwrap();
    assert_eq!(v["modes"].as_array().unwrap().len(), 5);
    assert!(v["stations"]["recommended_count"].as_u64().unwrap() >= 7);
    Command::cargo_bin("tapgrid")
        .unwrap()
        .args([
            "plan",
            "--length",
            "1.0",
            "--diameter",
            "0.025",
            "--band",
            "2000:20",
        ])
        .assert()
        .failure()
        .stderr(predicate::str::contains("band"));
    Command::cargo_bin("tapgrid")
        .unwrap()
        .args(["plan", "--band", "20:2000"])
        .assert()
        .failure()
        .stderr(predicate::str::contains("--length and --diameter"));
}
