//! Reproducers of an independent hardening trial: absurd values from the command line, a
//! manifest or a shaft file; two writers of one session; writers killed at random instants.
//! Each must give a clear error naming the field (exit 2), never a panic, an abort, a stall or a
//! lost update.

#![allow(clippy::unwrap_used, clippy::expect_used)]

use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use assert_cmd::Command;

fn bin() -> Command {
    Command::cargo_bin("tapgrid").unwrap()
}

/// A small simulated session (5 stations × 2 hits) in `dir/s`.
fn session(dir: &Path) -> PathBuf {
    bin()
        .args(["simulate", "--stations", "5", "--hits", "2", "--out"])
        .arg(dir.join("wav"))
        .assert()
        .success();
    let s = dir.join("s");
    bin()
        .arg("import")
        .arg(dir.join("wav"))
        .arg("--session")
        .arg(&s)
        .assert()
        .success();
    s
}

/// Exit 2, one message that names `names`, no panic.
fn refused(cmd: &mut Command, names: &str) -> String {
    let t0 = Instant::now();
    let out = cmd.timeout(Duration::from_secs(60)).assert().code(2);
    let err = String::from_utf8_lossy(&out.get_output().stderr).to_string();
    assert!(err.contains(names), "{err:?} should name {names:?}");
    assert!(!err.contains("panicked"), "{err}");
    assert!(
        t0.elapsed() < Duration::from_secs(20),
        "took {:?}",
        t0.elapsed()
    );
    err
}

#[test]
fn absurd_command_line_values_are_refused() {
    let t = tempfile::tempdir().unwrap();
    let s = session(t.path());
    // Once "capacity overflow" (exit 101).
    refused(
        bin()
            .arg("analyze")
            .arg(&s)
            .arg("--out")
            .arg(t.path().join("o"))
            .args(["--record-length", "1e30"]),
        "record length",
    );
    // Once an endless loop growing memory (the hold-off wrapped the sample index).
    refused(
        bin()
            .arg("analyze")
            .arg(&s)
            .arg("--out")
            .arg(t.path().join("o"))
            .args(["--holdoff", "1e300"]),
        "hold-off",
    );
    // Once a panic in the WAV writer.
    refused(
        bin()
            .args(["simulate", "--fs", "0", "--out"])
            .arg(t.path().join("z")),
        "sample rate",
    );
    refused(
        bin()
            .arg("analyze")
            .arg(&s)
            .arg("--out")
            .arg(t.path().join("o"))
            .args(["--full-scale-volts", "1e300"]),
        "full-scale volts",
    );
}

/// Rewrites the session's manifest with `edit` applied to its JSON.
fn edit_manifest(s: &Path, edit: impl FnOnce(&mut serde_json::Value)) {
    let p = s.join("session.json");
    let mut v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&p).unwrap()).unwrap();
    edit(&mut v);
    std::fs::write(&p, serde_json::to_string_pretty(&v).unwrap()).unwrap();
}

#[test]
fn absurd_manifest_values_are_refused_naming_the_field() {
    let t = tempfile::tempdir().unwrap();
    type Edit = Box<dyn Fn(&mut serde_json::Value)>;
    let cases: Vec<(&str, Edit, &str)> = vec![
        (
            "record",
            Box::new(|v| v["setup"]["trigger"]["record_length_s"] = 1e12.into()),
            "record length",
        ),
        (
            "fullscale",
            Box::new(|v| v["setup"]["full_scale_volts"] = 1e300.into()),
            "full-scale volts",
        ),
        (
            "sens",
            Box::new(|v| v["setup"]["channel_b"]["sensitivity"]["mv_per_unit"] = (-3.0).into()),
            "channel B sensitivity",
        ),
        (
            "frames",
            Box::new(|v| v["recordings"][0]["frames"] = 4_000_000_000_000u64.into()),
            "frames",
        ),
        (
            "position",
            Box::new(|v| v["stations"][1]["position_m"] = 1e300.into()),
            "position",
        ),
        (
            "rate",
            Box::new(|v| v["recordings"][0]["sample_rate_hz"] = 0.into()),
            "sample rate",
        ),
        (
            "hitindex",
            Box::new(|v| v["hits"][0]["index"] = 9_000_000_000u64.into()),
            "hit index",
        ),
    ];
    for (name, edit, says) in cases {
        let dir = t.path().join(name);
        std::fs::create_dir_all(&dir).unwrap();
        let s = session(&dir);
        edit_manifest(&s, edit);
        let err = refused(
            bin().arg("analyze").arg(&s).arg("--out").arg(dir.join("o")),
            "session.json",
        );
        assert!(err.contains(says), "{name}: {err:?} should say {says:?}");
    }
}

#[test]
fn a_shaft_with_an_absurd_section_is_refused_at_once() {
    let t = tempfile::tempdir().unwrap();
    let shaft = serde_json::json!({
        "material": {"youngs_modulus_pa": 2.0e11, "density_kg_m3": 7850.0, "poisson_ratio": 0.3},
        "sections": [
            {"length_m": 0.45, "outer_diameter_m": 0.05},
            {"length_m": 150000.0, "outer_diameter_m": 0.05},
            {"length_m": 0.45, "outer_diameter_m": 0.05}
        ]
    });
    let p = t.path().join("shaft.json");
    std::fs::write(&p, shaft.to_string()).unwrap();
    let err = refused(
        bin()
            .arg("model")
            .arg(&p)
            .arg("--out")
            .arg(t.path().join("o")),
        "shaft.json",
    );
    assert!(err.contains("section 2: length"), "{err}");
    // Density of a gas and a modulus of jelly are not a shaft either.
    let shaft = serde_json::json!({
        "material": {"youngs_modulus_pa": 2.0e11, "density_kg_m3": 1.2, "poisson_ratio": 0.3},
        "sections": [{"length_m": 0.9, "outer_diameter_m": 0.05}]
    });
    std::fs::write(&p, shaft.to_string()).unwrap();
    let err = refused(
        bin()
            .arg("model")
            .arg(&p)
            .arg("--out")
            .arg(t.path().join("o")),
        "shaft.json",
    );
    assert!(err.contains("density"), "{err}");
}

/// Two `verdict` commands on one session at once: both changes are kept (once, 20 of 20 lost one).
#[test]
fn two_writers_at_once_lose_no_update() {
    let t = tempfile::tempdir().unwrap();
    let s = session(t.path());
    for round in 0..3 {
        let v = if round % 2 == 0 { "reject" } else { "accept" };
        let run = |station: &str| {
            std::process::Command::new(assert_cmd::cargo::cargo_bin("tapgrid"))
                .args(["verdict"])
                .arg(&s)
                .args(["--station", station, "--hit", "1", "--set", v])
                .stdout(std::process::Stdio::null())
                .stderr(std::process::Stdio::piped())
                .spawn()
                .unwrap()
        };
        let (a, b) = (run("2"), run("4"));
        let (ra, rb) = (a.wait_with_output().unwrap(), b.wait_with_output().unwrap());
        assert!(
            ra.status.success(),
            "{}",
            String::from_utf8_lossy(&ra.stderr)
        );
        assert!(
            rb.status.success(),
            "{}",
            String::from_utf8_lossy(&rb.stderr)
        );
        let m: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(s.join("session.json")).unwrap())
                .unwrap();
        let ov = |st: u64| {
            m["hits"]
                .as_array()
                .unwrap()
                .iter()
                .find(|h| h["station"] == st && h["index"] == 0)
                .map(|h| h["override"].clone())
                .unwrap()
        };
        let want = serde_json::Value::Bool(v == "accept");
        assert_eq!(ov(2), want, "round {round}: station 2's verdict was lost");
        assert_eq!(ov(4), want, "round {round}: station 4's verdict was lost");
    }
}

/// `verdict` killed at 30 instants: the session always opens afterwards, and the next writer
/// clears any temp file the killed one left.
#[test]
fn a_writer_killed_at_any_instant_leaves_an_openable_session() {
    let t = tempfile::tempdir().unwrap();
    let s = session(t.path());
    let mut rng: u64 = 0x9e37_79b9_7f4a_7c15;
    for i in 0..30 {
        rng ^= rng << 13;
        rng ^= rng >> 7;
        rng ^= rng << 17;
        let delay_ms = rng % 400;
        let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("tapgrid"))
            .arg("verdict")
            .arg(&s)
            .args(["--station", "3", "--hit", "2", "--set"])
            .arg(if i % 2 == 0 { "reject" } else { "auto" })
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::null())
            .spawn()
            .unwrap();
        std::thread::sleep(Duration::from_millis(delay_ms));
        let _ = child.kill();
        let _ = child.wait();
        tapgrid::session::Session::open(&s)
            .unwrap_or_else(|e| panic!("run {i}, killed after {delay_ms} ms: {e}"));
    }
    // The next writer finds no stale temp file after taking the lock.
    bin()
        .arg("verdict")
        .arg(&s)
        .args(["--station", "3", "--hit", "2", "--set", "auto"])
        .assert()
        .success();
    let temps: Vec<String> = std::fs::read_dir(&s)
        .unwrap()
        .chain(std::fs::read_dir(s.join("raw")).unwrap())
        .flatten()
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains(".tmp-"))
        .collect();
    assert!(temps.is_empty(), "{temps:?}");
}
