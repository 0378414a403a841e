//! The command line on the real binary, over small generated sets.

#![allow(clippy::unwrap_used, clippy::expect_used)]

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use predicates::prelude::*;
use serde_json::Value;
use tapgrid::acquire::wav::SampleEncoding;
use tapgrid::setup::Layout;
use tapgrid::sim::Scenario;

fn small(layout: Layout, dir: &Path) -> Scenario {
    let mut sc = Scenario::pump_shaft();
    sc.set_layout(layout);
    sc.stations_m = vec![0.0, 0.3, 0.6, 0.9];
    sc.drive_station = 4;
    sc.hits_per_station = 3;
    sc.rig.sample_rate_hz = 16_000;
    sc.rig.encoding = SampleEncoding::Int24;
    sc.double_hits = vec![(2, 1)];
    sc.overloads = vec![(3, 0)];
    sc.write(dir).unwrap();
    sc
}

fn bin() -> Command {
    Command::cargo_bin("tapgrid").unwrap()
}

fn read_json(p: PathBuf) -> Value {
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

#[test]
fn analyze_writes_frf_csv_and_result_json() {
    let t = tempfile::tempdir().unwrap();
    let set = t.path().join("set");
    small(Layout::Hammer, &set);
    let out = t.path().join("out");
    bin()
        .args([
            "analyze",
            set.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--band",
            "10:3000",
        ])
        .args(["--sensitivity", "2.25mV/N,1.02mV/(m/s^2)"])
        .assert()
        .success()
        .stdout(predicate::str::contains("double_hit"));
    let r = read_json(out.join("result.json"));
    let hits = r["hits"].as_array().unwrap();
    assert_eq!(hits.len(), 12);
    for h in hits {
        let (s, i) = (h["station"].as_u64().unwrap(), h["index"].as_u64().unwrap());
        let reasons: Vec<&str> = h["reasons"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_str().unwrap())
            .collect();
        match (s, i) {
            (2, 1) => assert_eq!(reasons, ["double_hit"]),
            (3, 0) => assert!(reasons.contains(&"overload")),
            _ => assert!(reasons.is_empty(), "station {s} hit {i}: {reasons:?}"),
        }
        assert_eq!(h["accepted"].as_bool().unwrap(), reasons.is_empty());
    }
    let st = r["stations"].as_array().unwrap();
    assert_eq!(st.len(), 4);
    assert_eq!(st[1]["position_m"].as_f64().unwrap(), 0.3);
    assert_eq!(st[1]["accepted_hits"].as_u64().unwrap(), 2);
    // The modal stage reports the truth's flexible modes inside the band (details in modal tests).
    assert!(!r["modes"].as_array().unwrap().is_empty());
    assert!(r["settings"].is_object());

    let csv = std::fs::read_to_string(out.join("frf.csv")).unwrap();
    let mut lines = csv.lines();
    assert_eq!(
        lines.next().unwrap(),
        "station,frequency_hz,h_re,h_im,coherence"
    );
    let rows: Vec<Vec<f64>> = lines
        .map(|l| l.split(',').map(|x| x.parse().unwrap()).collect())
        .collect();
    let df = r["settings"]["frequency_resolution_hz"].as_f64().unwrap();
    let per_station = ((3000.0 / df).floor() - (10.0 / df).ceil() + 1.0) as usize;
    assert_eq!(rows.len(), 4 * per_station);
    assert!(
        rows.iter()
            .all(|r| r[1] >= 10.0 && r[1] <= 3000.0 && (0.0..=1.0).contains(&r[4]))
    );

    // Driving point (station 1 is the reference): |H| peaks at the truth's flexible modes, within
    // two lines, and Im H > 0 there (Ewins 2000 sign convention).
    let truth = read_json(set.join("truth.json"));
    let st1: Vec<&Vec<f64>> = rows.iter().filter(|r| r[0] == 1.0).collect();
    for m in truth["modes"].as_array().unwrap() {
        let f = m["frequency_hz"].as_f64().unwrap();
        if !(100.0..2900.0).contains(&f) {
            continue;
        }
        let near: Vec<&&Vec<f64>> = st1.iter().filter(|r| (r[1] - f).abs() < 0.02 * f).collect();
        let peak = near
            .iter()
            .max_by(|a, b| a[2].hypot(a[3]).total_cmp(&b[2].hypot(b[3])))
            .unwrap();
        assert!(
            (peak[1] - f).abs() <= 2.0 * df,
            "peak at {} for mode {f}",
            peak[1]
        );
        assert!(peak[3] > 0.0, "Im A at {f} Hz");
    }
}

#[test]
fn sensitivities_scale_the_frf() {
    // H = (V_b/V_a)·(S_a/S_b): the units only rescale.
    let t = tempfile::tempdir().unwrap();
    let set = t.path().join("set");
    small(Layout::Hammer, &set);
    let run = |extra: &[&str], out: &str| {
        let o = t.path().join(out);
        bin()
            .args([
                "analyze",
                set.to_str().unwrap(),
                "--out",
                o.to_str().unwrap(),
                "--band",
                "100:200",
            ])
            .args(extra)
            .assert()
            .success();
        let csv = std::fs::read_to_string(o.join("frf.csv")).unwrap();
        csv.lines()
            .skip(1)
            .map(|l| l.split(',').nth(2).unwrap().parse::<f64>().unwrap())
            .collect::<Vec<f64>>()
    };
    let plain = run(&[], "o1");
    let units = run(&["--sensitivity", "2.25mV/N,100mV/g"], "o2");
    let k = 2.25 / (100.0 / 9.80665);
    for (p, u) in plain.iter().zip(&units) {
        assert!(
            (u - p * k).abs() <= 1e-6 * p.abs().max(1e-12),
            "{u} vs {}",
            p * k
        );
    }
}

#[test]
fn sensor_layout_gives_unit_transmissibility_at_the_reference() {
    let t = tempfile::tempdir().unwrap();
    let set = t.path().join("set");
    small(Layout::Sensor, &set);
    let out = t.path().join("out");
    bin()
        .args([
            "analyze",
            set.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--layout",
            "sensor",
            "--band",
            "100:3000",
        ])
        .assert()
        .success();
    let csv = std::fs::read_to_string(out.join("frf.csv")).unwrap();
    for l in csv.lines().skip(1).filter(|l| l.starts_with("1,")) {
        let v: Vec<f64> = l.split(',').map(|x| x.parse().unwrap()).collect();
        // Roving sensor on the reference station: T = 1 and γ² = 1 (Devriendt & Guillaume, MSSP 21, 2007).
        // Independent noise on the channels (30 µV) leaves a few per cent at quiet lines.
        assert!(
            (v[2] - 1.0).abs() < 0.05 && v[3].abs() < 0.05 && v[4] > 0.99,
            "{l}"
        );
    }
    let r = read_json(out.join("result.json"));
    assert_eq!(r["settings"]["frf_quantity"], "transmissibility");
}

#[test]
fn import_override_and_reanalyse_a_session() {
    let t = tempfile::tempdir().unwrap();
    let set = t.path().join("set");
    small(Layout::Hammer, &set);
    let ses = t.path().join("session");
    bin()
        .args([
            "import",
            set.to_str().unwrap(),
            "--session",
            ses.to_str().unwrap(),
            "--band",
            "10:3000",
            "--part",
            "test shaft",
        ])
        .assert()
        .success();
    // Raw recordings are byte-for-byte copies.
    for n in 1..=4 {
        let a = std::fs::read(set.join(format!("station-{n:02}.wav"))).unwrap();
        let b = std::fs::read(ses.join(format!("raw/station-{n:03}.wav"))).unwrap();
        assert_eq!(a, b);
    }
    let m = read_json(ses.join("session.json"));
    assert_eq!(m["schema_version"], 2);
    assert_eq!(m["hits"].as_array().unwrap().len(), 12);
    // Keep the double hit by a person's decision.
    bin()
        .args([
            "verdict",
            ses.to_str().unwrap(),
            "--station",
            "2",
            "--hit",
            "2",
            "--set",
            "accept",
        ])
        .assert()
        .success();
    let out = t.path().join("out");
    bin()
        .args([
            "analyze",
            ses.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ])
        .assert()
        .success();
    let r = read_json(out.join("result.json"));
    let h = r["hits"]
        .as_array()
        .unwrap()
        .iter()
        .find(|h| h["station"] == 2 && h["index"] == 1)
        .unwrap()
        .clone();
    assert_eq!(h["accepted"], true);
    assert_eq!(h["overridden"], true);
    assert_eq!(h["reasons"][0], "double_hit");
    assert_eq!(r["stations"][1]["accepted_hits"], 3);
    // And back to automatic.
    bin()
        .args([
            "verdict",
            ses.to_str().unwrap(),
            "--station",
            "2",
            "--hit",
            "2",
            "--set",
            "auto",
        ])
        .assert()
        .success();
    let m = read_json(ses.join("session.json"));
    let h = m["hits"]
        .as_array()
        .unwrap()
        .iter()
        .find(|h| h["station"] == 2 && h["index"] == 1)
        .unwrap()
        .clone();
    assert_eq!(h["accepted"], false);
    assert!(h["override"].is_null());
}

#[test]
fn simulate_command_writes_a_set() {
    let t = tempfile::tempdir().unwrap();
    let out = t.path().join("sim");
    bin()
        .args([
            "simulate",
            "--out",
            out.to_str().unwrap(),
            // 14 stations: 0.9 m · 13/13 rounds to 0.9000000000000001 and was refused as
            // beyond the shaft.
            "--stations",
            "14",
            "--hits",
            "2",
            "--fs",
            "8000",
            "--encoding",
            "float32",
        ])
        .assert()
        .success()
        .stdout(predicate::str::contains("Hz"));
    let csv = std::fs::read_to_string(out.join("stations.csv")).unwrap();
    assert_eq!(csv.lines().count(), 15);
    assert!(
        out.join("station-14.wav").is_file()
            && out.join("truth.json").is_file()
            && out.join("stations.csv").is_file()
    );
}

/// The record is chosen from the tapping only when it must be: taps 0.7 s apart at 16 kHz are
/// closer than the default record (the next power of two ≥ 1 s: 16384 samples, 1.024 s), so the
/// first pass stops, every tap is surveyed and a shorter record is used, with a note saying so;
/// taps 1.5 s apart keep the default record and need no note (common practice: a record must
/// end before the next tap).
#[test]
fn the_record_follows_the_tapping_only_when_taps_are_faster_than_it() {
    let t = tempfile::tempdir().unwrap();
    for (interval, shortened) in [(0.7, true), (1.5, false)] {
        let set = t.path().join(format!("set-{interval}"));
        let mut sc = Scenario::pump_shaft();
        sc.stations_m = vec![0.0, 0.3, 0.6, 0.9];
        sc.drive_station = 4;
        sc.hits_per_station = 3;
        sc.hit_interval_s = interval;
        sc.rig.sample_rate_hz = 16_000;
        sc.write(&set).unwrap();
        let out = t.path().join(format!("out-{interval}"));
        let run = bin()
            .args([
                "analyze",
                set.to_str().unwrap(),
                "--out",
                out.to_str().unwrap(),
            ])
            .args(["--band", "10:3000"])
            .assert()
            .success();
        let text = String::from_utf8_lossy(&run.get_output().stdout).to_string();
        assert_eq!(text.contains("taps came 0.70 s apart"), shortened, "{text}");
        assert_eq!(!text.contains("record 16384 samples"), shortened, "{text}");
        let r = read_json(out.join("result.json"));
        let hits = r["hits"].as_array().unwrap();
        assert_eq!(hits.len(), 12);
        assert!(
            hits.iter().all(|h| h["accepted"].as_bool().unwrap()),
            "{hits:?}"
        );
    }
}
