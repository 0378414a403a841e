//! The rotor commands' contract (README "The rotor at speed"): `tapgrid bearing plain` prints
//! the operating point and eight coefficients; `tapgrid rotor` writes campbell.json and
//! unbalance.csv; bad rotor files exit 2 naming the file and the fault.

#![allow(clippy::unwrap_used, clippy::expect_used)]

use assert_cmd::Command;
use predicates::prelude::*;
use serde_json::Value;

fn tapgrid() -> Command {
    Command::cargo_bin("tapgrid").unwrap()
}

#[test]
fn plain_bearing_prints_the_short_bearing_solution() {
    // rotor-notes §D9 [der]: μ = 0.03 Pa·s, D = 25 mm, L = 12.5 mm, c = 50 µm, W = 50 N,
    // 3000 rpm: ε = 0.4326, φ = 58.58°, S_s = 0.4602 (so S = S_s/(π(L/D)²) = 0.5859);
    // K in the load frame kxx = 2.440e6, kxy = 3.995e6, kyx = −1.313e6, kyy = 2.285e6 N/m.
    let out = tapgrid()
        .args([
            "bearing",
            "plain",
            "--diameter-m",
            "0.025",
            "--length-m",
            "0.0125",
            "--clearance-m",
            "50e-6",
            "--viscosity-pa-s",
            "0.03",
            "--load-n",
            "50",
            "--speed-rpm",
            "3000",
        ])
        .output()
        .unwrap();
    assert!(out.status.success());
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let f = |k: &str| v[k].as_f64().unwrap();
    assert!((f("eccentricity_ratio") - 0.4326).abs() < 1e-4);
    assert!((f("attitude_angle_deg") - 58.58).abs() < 0.01);
    assert!((f("sommerfeld") - 0.4602 / (std::f64::consts::PI * 0.25)).abs() < 1e-3);
    let k = &v["k_n_per_m"];
    for (i, j, want) in [
        (0, 0, 2.440e6),
        (0, 1, 3.995e6),
        (1, 0, -1.313e6),
        (1, 1, 2.285e6),
    ] {
        let got = k[i][j].as_f64().unwrap();
        assert!(
            (got / want - 1.0).abs() < 1e-3,
            "k[{i}][{j}] {got} vs {want}"
        );
    }
    assert!(v["c_n_s_per_m"][0][1].as_f64().unwrap() > 0.0);
}

#[test]
fn rotor_writes_the_campbell_diagram_and_the_unbalance_response() {
    let dir = tempfile::tempdir().unwrap();
    let rotor = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/sample-sessions/rotors/pump-rotor.json"
    );
    tapgrid()
        .args(["rotor", rotor, "--out"])
        .arg(dir.path())
        .args(["--speeds", "500:12000:47", "--modes", "4"])
        .assert()
        .success()
        .stdout(predicate::str::contains("critical speed"));
    let v: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("campbell.json")).unwrap())
            .unwrap();
    let points = v["points"].as_array().unwrap();
    assert_eq!(points.len(), 47 * 4);
    for p in points {
        for k in ["speed_rpm", "frequency_hz", "damping_ratio", "log_dec"] {
            assert!(p[k].as_f64().is_some(), "{k}");
        }
        assert!(["forward", "backward"].contains(&p["whirl"].as_str().unwrap()));
    }
    let crit = v["critical_speeds"].as_array().unwrap();
    assert!(!crit.is_empty());
    assert!(
        crit.iter()
            .all(|c| [1, 2].contains(&c["order"].as_u64().unwrap()))
    );
    assert!(v["stability_threshold_rpm"].as_f64().is_some());
    let csv = std::fs::read_to_string(dir.path().join("unbalance.csv")).unwrap();
    let mut lines = csv.lines();
    assert_eq!(
        lines.next(),
        Some("speed_rpm,station_or_position_m,amplitude_m,phase_deg")
    );
    let row: Vec<f64> = lines
        .next()
        .unwrap()
        .split(',')
        .map(|x| x.parse().unwrap())
        .collect();
    assert_eq!(row.len(), 4);
    assert!(row[2] >= 0.0 && (0.0..360.0).contains(&row[3]));
}

#[test]
fn bad_rotor_files_exit_2_naming_the_file_and_the_fault() {
    let dir = tempfile::tempdir().unwrap();
    let shaft = r#""material": {"youngs_modulus_pa": 2.1e11, "density_kg_m3": 7850, "poisson_ratio": 0.3},
        "sections": [{"length_m": 0.5, "outer_diameter_m": 0.03}]"#;
    for (name, body, fault) in [
        ("notjson.json", "{ nope".to_string(), "is not valid JSON"),
        (
            "unknown.json",
            format!("{{{shaft}, \"bearing\": []}}"),
            "unknown key \"bearing\"",
        ),
        (
            "noposition.json",
            format!("{{{shaft}, \"bearings\": [{{\"kxx\": 1e6}}]}}"),
            "bearing 1: has no \"position_m\"",
        ),
        (
            "table.json",
            format!(
                "{{{shaft}, \"bearings\": [{{\"position_m\": 0.1, \"speeds_rpm\": [0, 1000], \"kxx\": [1e6]}}]}}"
            ),
            "bearing 1: kxx has 1 values for 2 speeds",
        ),
        (
            "outside.json",
            format!(
                "{{{shaft}, \"unbalances\": [{{\"position_m\": 0.9, \"amount_kg_m\": 1e-4}}]}}"
            ),
            "unbalance 1 at 0.9 m is outside the shaft",
        ),
        (
            "clearance.json",
            format!(
                "{{{shaft}, \"bearings\": [{{\"position_m\": 0.1, \"plain\": {{\"diameter_m\": 0.03, \"length_m\": 0.015, \"clearance_m\": -1e-5, \"viscosity_pa_s\": 0.02, \"load_n\": 50}}}}]}}"
            ),
            "bearing 1: radial clearance",
        ),
        (
            "coeff.json",
            format!("{{{shaft}, \"bearings\": [{{\"position_m\": 0.1, \"kxx\": \"stiff\"}}]}}"),
            "bearing 1: kxx must be a number",
        ),
    ] {
        let p = dir.path().join(name);
        std::fs::write(&p, body).unwrap();
        tapgrid()
            .args(["rotor"])
            .arg(&p)
            .arg("--out")
            .arg(dir.path().join("out"))
            .assert()
            .code(2)
            .stderr(predicate::str::contains(name).and(predicate::str::contains(fault)));
    }
    // Bad speeds and a bearing that cannot run.
    tapgrid()
        .args([
            "bearing",
            "plain",
            "--diameter-m",
            "0.03",
            "--length-m",
            "0.015",
        ])
        .args([
            "--clearance-m",
            "3e-5",
            "--viscosity-pa-s",
            "0.02",
            "--load-n",
            "50",
        ])
        .args(["--speed-rpm", "0"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("positive speed"));
}

#[test]
fn the_report_gains_the_rotor_at_speed_from_a_rotor_file() {
    // `tapgrid report --model ROTOR.json`: the service part of the rotor file is solved at speed
    // and reported with its caution; the critical speeds are those `tapgrid rotor` finds.
    let dir = tempfile::tempdir().unwrap();
    let root = env!("CARGO_MANIFEST_DIR");
    let out = dir.path().join("report.html");
    tapgrid()
        .args([
            "report",
            &format!("{root}/sample-sessions/pump-shaft"),
            "--model",
        ])
        .arg(format!("{root}/sample-sessions/rotors/pump-rotor.json"))
        .arg("--out")
        .arg(&out)
        .assert()
        .success();
    let html = std::fs::read_to_string(&out).unwrap();
    let at = html.find("<h2>Rotor at speed</h2>").expect("rotor section");
    let section = &html[at..];
    assert!(section.contains("linearised rotor model"));
    assert!(section.contains("<td>7036</td><td>1×</td><td class=\"l\">forward</td>"));
    assert!(section.contains("Response to the unbalance"));
}
