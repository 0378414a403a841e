//! Bad input: each case exits with code 2 and one clear message naming the file, never a panic.

#![allow(clippy::unwrap_used, clippy::expect_used)]

use std::path::Path;

use assert_cmd::Command;
use predicates::prelude::*;
use tapgrid::acquire::wav::{SampleEncoding, write_channels};

fn pulse_train(fs: u32, seconds: f64) -> (Vec<f64>, Vec<f64>) {
    let n = (fs as f64 * seconds) as usize;
    let mut a = vec![0.0; n];
    let mut b = vec![0.0; n];
    for (h, t0) in [0.2, 1.5].iter().enumerate() {
        let i0 = (t0 * fs as f64) as usize;
        for k in 0..8 {
            a[i0 + k] = 0.4 * (std::f64::consts::PI * k as f64 / 8.0).sin();
        }
        for k in 0..(fs as usize / 2) {
            let t = k as f64 / fs as f64;
            b[i0 + k] += 0.2
                * (-(20.0 + h as f64) * t).exp()
                * (2.0 * std::f64::consts::PI * 300.0 * t).sin();
        }
    }
    (a, b)
}

fn good_wav(path: &Path, fs: u32) {
    let (a, b) = pulse_train(fs, 3.0);
    write_channels(path, fs, SampleEncoding::Int16, &[&a, &b]).unwrap();
}

fn hound_wav(path: &Path, channels: u16, bits: u16, fs: u32) {
    let spec = hound::WavSpec {
        channels,
        sample_rate: fs,
        bits_per_sample: bits,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    for i in 0..fs {
        for _ in 0..channels {
            if bits == 8 {
                w.write_sample((i % 100) as i8).unwrap();
            } else {
                w.write_sample((i % 1000) as i16).unwrap();
            }
        }
    }
    w.finalize().unwrap();
}

/// Runs `analyze` and checks: exit 2, the message names `names` and says `says`, no panic.
fn fails(dir: &Path, extra: &[&str], names: &str, says: &str) {
    let out = dir.parent().unwrap().join(format!(
        "{}-out",
        dir.file_name().unwrap().to_string_lossy()
    ));
    let a = Command::cargo_bin("tapgrid")
        .unwrap()
        .args([
            "analyze",
            dir.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ])
        .args(extra)
        .assert()
        .code(2);
    let err = String::from_utf8_lossy(&a.get_output().stderr).to_string();
    assert!(err.contains(names), "message {err:?} should name {names:?}");
    assert!(
        err.to_lowercase().contains(&says.to_lowercase()),
        "message {err:?} should say {says:?}"
    );
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(err.trim().lines().count(), 1, "one line: {err:?}");
}

fn case(t: &tempfile::TempDir, name: &str) -> std::path::PathBuf {
    let d = t.path().join(name);
    std::fs::create_dir_all(&d).unwrap();
    d
}

#[test]
fn a_good_set_passes() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "good");
    good_wav(&d.join("st1.wav"), 8000);
    good_wav(&d.join("st2.wav"), 8000);
    Command::cargo_bin("tapgrid")
        .unwrap()
        .args([
            "analyze",
            d.to_str().unwrap(),
            "--out",
            t.path().join("o").to_str().unwrap(),
        ])
        .assert()
        .success();
}

#[test]
fn stations_csv_with_a_byte_order_mark_and_extra_columns_is_read() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "csv");
    good_wav(&d.join("st1.wav"), 8000);
    good_wav(&d.join("st2.wav"), 8000);
    std::fs::write(
        d.join("stations.csv"),
        "\u{feff}station,label,position_m\n1,left end,0.05\n2,bearing,0.35\n",
    )
    .unwrap();
    let out = t.path().join("o");
    Command::cargo_bin("tapgrid")
        .unwrap()
        .args([
            "analyze",
            d.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ])
        .assert()
        .success();
    let r: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("result.json")).unwrap()).unwrap();
    assert_eq!(r["stations"][1]["position_m"], 0.35);
    assert_eq!(r["stations"][1]["position_source"], "csv");
}

#[test]
fn stations_csv_missing_a_station_names_it() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "csvmiss");
    good_wav(&d.join("st1.wav"), 8000);
    good_wav(&d.join("st2.wav"), 8000);
    std::fs::write(d.join("stations.csv"), "station,position_m\n1,0.0\n").unwrap();
    fails(&d, &[], "stations.csv", "no position for station 2");
}

#[test]
fn a_raw_recording_changed_after_capture_is_reported() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "set");
    good_wav(&d.join("st1.wav"), 8000);
    let ses = t.path().join("ses");
    Command::cargo_bin("tapgrid")
        .unwrap()
        .args([
            "import",
            d.to_str().unwrap(),
            "--session",
            ses.to_str().unwrap(),
        ])
        .assert()
        .success();
    let raw = ses.join("raw/station-001.wav");
    let mut bytes = std::fs::read(&raw).unwrap();
    bytes.extend_from_slice(&[0, 0]);
    std::fs::write(&raw, bytes).unwrap();
    fails(&ses, &[], "station-001.wav", "changed after capture");
}

#[test]
fn empty_folder() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "empty");
    fails(&d, &[], "empty", "no .wav");
}

#[test]
fn text_file_named_wav() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "text");
    std::fs::write(d.join("station-01.wav"), "these are my notes, not audio").unwrap();
    fails(&d, &[], "station-01.wav", "not a readable WAV");
}

#[test]
fn truncated_wav() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "trunc");
    let p = d.join("station-01.wav");
    good_wav(&p, 8000);
    let bytes = std::fs::read(&p).unwrap();
    std::fs::write(&p, &bytes[..bytes.len() - 1001]).unwrap();
    fails(&d, &[], "station-01.wav", "truncated");
}

#[test]
fn mono_file() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "mono");
    hound_wav(&d.join("p1.wav"), 1, 16, 8000);
    fails(&d, &[], "p1.wav", "1 channel");
}

#[test]
fn eight_bit_file() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "eight");
    hound_wav(&d.join("p1.wav"), 2, 8, 8000);
    fails(&d, &[], "p1.wav", "8-bit");
}

#[test]
fn channel_index_out_of_range() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "chan");
    good_wav(&d.join("p1.wav"), 8000);
    fails(&d, &["--channels", "0,5"], "p1.wav", "out of range");
}

#[test]
fn one_station_twice() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "twice");
    good_wav(&d.join("p1.wav"), 8000);
    good_wav(&d.join("station-01.wav"), 8000);
    fails(&d, &[], "p1.wav", "recorded twice");
}

#[test]
fn file_without_station_number() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "nonum");
    good_wav(&d.join("tap.wav"), 8000);
    fails(&d, &[], "tap.wav", "no station number");
}

#[test]
fn differing_sample_rates() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "rates");
    good_wav(&d.join("p1.wav"), 8000);
    good_wav(&d.join("p2.wav"), 16000);
    fails(&d, &[], "p2.wav", "sample rate");
}

#[test]
fn file_with_no_hit() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "nohit");
    let quiet = vec![1e-4; 16000];
    write_channels(
        &d.join("p1.wav"),
        8000,
        SampleEncoding::Int16,
        &[&quiet, &quiet],
    )
    .unwrap();
    fails(&d, &[], "p1.wav", "no hit");
}

#[test]
fn nan_and_infinity_in_float_wav() {
    let t = tempfile::tempdir().unwrap();
    for (name, bad) in [("nan", f32::NAN), ("inf", f32::INFINITY)] {
        let d = case(&t, name);
        let spec = hound::WavSpec {
            channels: 2,
            sample_rate: 8000,
            bits_per_sample: 32,
            sample_format: hound::SampleFormat::Float,
        };
        let mut w = hound::WavWriter::create(d.join("p1.wav"), spec).unwrap();
        for i in 0..16000 {
            w.write_sample(if i == 777 { bad } else { 0.0f32 }).unwrap();
            w.write_sample(0.0f32).unwrap();
        }
        w.finalize().unwrap();
        fails(&d, &[], "p1.wav", "non-finite");
    }
}

#[test]
fn unwritable_output_folder() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "outbad");
    good_wav(&d.join("p1.wav"), 8000);
    // A folder below a regular file can never be created (root ignores permission bits).
    let blocker = t.path().join("blocker");
    std::fs::write(&blocker, "x").unwrap();
    let out = blocker.join("out");
    let a = Command::cargo_bin("tapgrid")
        .unwrap()
        .args([
            "analyze",
            d.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ])
        .assert()
        .code(2);
    let err = String::from_utf8_lossy(&a.get_output().stderr).to_string();
    assert!(
        err.contains("blocker") && err.contains("cannot create output folder"),
        "{err}"
    );
}

#[test]
fn bad_options_and_sessions() {
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "opts");
    good_wav(&d.join("p1.wav"), 8000);
    fails(
        &d,
        &["--sensitivity", "2.25mV/g,10"],
        "--sensitivity A",
        "measures N",
    );
    fails(&d, &["--band", "500:100"], "band", "low < high");
    // A manifest from a newer schema is refused with a reason.
    let s = case(&t, "newer");
    std::fs::write(
        s.join("session.json"),
        r#"{"format":"tapgrid-session","schema_version":99}"#,
    )
    .unwrap();
    fails(&s, &[], "session.json", "newer");
    let s = case(&t, "notjson");
    std::fs::write(s.join("session.json"), "{").unwrap();
    fails(&s, &[], "session.json", "not valid JSON");
}

/// With no display the window cannot open: one clear line, exit 2, no panic.
#[test]
fn window_without_a_display_says_so() {
    let home = tempfile::tempdir().unwrap();
    Command::cargo_bin("tapgrid")
        .unwrap()
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .env_remove("DISPLAY")
        .env_remove("WAYLAND_DISPLAY")
        .env("HOME", home.path())
        .env("XDG_DATA_HOME", home.path().join("data"))
        .assert()
        .code(2)
        .stderr(predicates::str::contains("cannot open the window"))
        .stderr(predicates::str::contains("panicked").not());
}

/// Opening something that is not a folder names it.
#[test]
fn window_on_a_missing_folder_names_it() {
    Command::cargo_bin("tapgrid")
        .unwrap()
        .arg("/nonexistent/tapgrid-session")
        .assert()
        .code(2)
        .stderr(predicates::str::contains("/nonexistent/tapgrid-session"))
        .stderr(predicates::str::contains("is not a folder"));
}

#[test]
fn a_band_above_nyquist() {
    // 8 kHz sampling holds nothing above 4 kHz (Nyquist–Shannon); the band must not be clipped
    // quietly.
    let t = tempfile::tempdir().unwrap();
    let d = case(&t, "nyquist");
    good_wav(&d.join("st1.wav"), 8000);
    fails(
        &d,
        &["--band", "10:6000"],
        "st1.wav",
        "above the Nyquist frequency 4000 Hz",
    );
}
