//! `tapgrid report` on the real binary: the written report states the fit `analyze` finds, the
//! model correlation and margin lines that follow the published rule, and the cautions; bad input
//! fails with exit 2 and names the file.

#![allow(clippy::unwrap_used, clippy::expect_used)]

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use predicates::prelude::*;
use serde_json::Value;

fn demo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-sessions/pump-shaft")
}

fn bin() -> Command {
    Command::cargo_bin("tapgrid").unwrap()
}

/// Margin required above the operating range (API RP 684, 2nd ed. 2005, from
/// memory): none below AF 2.5, else min(26, 10 + 17(1 − 1/(AF − 1.5))) %, AF = 1/(2ζ).
fn api_above_pct(zeta: f64) -> f64 {
    let af = 1.0 / (2.0 * zeta);
    if af < 2.5 {
        0.0
    } else {
        (10.0 + 17.0 * (1.0 - 1.0 / (af - 1.5))).min(26.0)
    }
}

#[test]
fn the_demo_report_states_the_fit_the_model_and_rule_conforming_margins() {
    let t = tempfile::tempdir().unwrap();
    let page = t.path().join("nested/demo-report.html");
    bin()
        .arg("report")
        .arg(demo())
        .arg("--out")
        .arg(&page)
        .assert()
        .success()
        .stdout(predicate::str::contains("wrote"));
    let html = std::fs::read_to_string(&page).unwrap();
    // The same fit as `analyze` (result.json) on the same session and settings.
    let out = t.path().join("out");
    bin()
        .arg("analyze")
        .arg(demo())
        .arg("--out")
        .arg(&out)
        .assert()
        .success();
    let r: Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("result.json")).unwrap()).unwrap();
    let modes = r["modes"].as_array().unwrap();
    assert_eq!(modes.len(), 5, "the demo holds five modes in its band");
    // The demo's model was simulated from these frequencies (simulation-truth.json).
    let truth: Value = serde_json::from_str(
        &std::fs::read_to_string(demo().join("simulation-truth.json")).unwrap(),
    )
    .unwrap();
    let truth_hz: Vec<f64> = truth["modes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| m["frequency_hz"].as_f64().unwrap())
        .collect();
    for m in modes {
        let f = m["frequency_hz"].as_f64().unwrap();
        let z = m["damping_ratio"].as_f64().unwrap();
        assert!(html.contains(&format!("<td>{f:.2}</td>")), "mode {f} Hz");
        assert!(
            truth_hz.iter().any(|t| ((f - t) / t).abs() < 1e-3),
            "{f} Hz is within 0.1 % of a simulated mode"
        );
        // Every measured mode lies far above 2900–3000 rpm at 1×: margin and requirement by the
        // rule, computed here independently.
        let rpm = 60.0 * f;
        let margin = (rpm - 3000.0) / 3000.0 * 100.0;
        let row = format!(
            "<td class=\"l\">measured (bench)</td><td>{}</td><td>{f:.2}</td><td>1×</td><td>{rpm:.0}</td>\
             <td>{:.1}</td><td class=\"l\">above the range</td><td>{margin:.1}</td><td>{:.1}</td>",
            modes.iter().position(|x| x == m).unwrap() + 1,
            1.0 / (2.0 * z),
            api_above_pct(z)
        );
        assert!(html.contains(&row), "margin row {row}");
    }
    for heading in [
        "Test setup",
        "Hits",
        "FRFs",
        "Modes",
        "Shaft model",
        "Running-speed margins",
    ] {
        assert!(html.contains(&format!("<h2>{heading}</h2>")), "{heading}");
    }
    // Every test mode pairs with a model mode, and no model mode in the band was missed.
    assert!(!html.contains("pairs with no model mode"));
    assert!(!html.contains("was not found in the test"));
    // The cautions go with it; nothing is fetched from elsewhere.
    assert!(html.contains("locked out"));
    assert!(html.contains("Advisory only"));
    assert!(html.contains("no gyroscopic effect"));
    assert!(!html.contains("<script"));
    assert_eq!(
        html.matches("http").count(),
        html.matches("http://www.w3.org/2000/svg").count()
    );
    // Two FRF plots, one plot per mode shape and the critical-speed map.
    assert_eq!(html.matches("<svg").count(), 3 + modes.len());
    // The demo's recorded double hit and overload are explained in words.
    assert!(html.contains("struck twice"));
    assert!(html.contains("full scale"));
}

#[test]
fn a_wav_set_without_a_model_says_so() {
    let t = tempfile::tempdir().unwrap();
    let page = t.path().join("r.html");
    let set = demo().parent().unwrap().join("pump-shaft-roving-sensor");
    bin()
        .arg("report")
        .arg(&set)
        .args(["--layout", "sensor"])
        .arg("--out")
        .arg(&page)
        .assert()
        .success();
    let html = std::fs::read_to_string(&page).unwrap();
    assert!(html.contains("No shaft model was given"));
    assert!(html.contains("transmissibility"));
}

#[test]
fn bad_input_names_the_file_and_exits_2() {
    let t = tempfile::tempdir().unwrap();
    let empty = t.path().join("empty");
    std::fs::create_dir(&empty).unwrap();
    bin()
        .arg("report")
        .arg(&empty)
        .arg("--out")
        .arg(t.path().join("r.html"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains(empty.display().to_string()));
    // The report's folder cannot be made: a file stands in its way.
    let blocker = t.path().join("file");
    std::fs::write(&blocker, "x").unwrap();
    let page = blocker.join("r.html");
    bin()
        .arg("report")
        .arg(demo().parent().unwrap().join("pump-shaft-roving-sensor"))
        .arg("--out")
        .arg(&page)
        .assert()
        .code(2)
        .stderr(predicate::str::contains(blocker.display().to_string()));
    // A model file that is not one.
    let junk = t.path().join("shaft.json");
    std::fs::write(&junk, "{not json").unwrap();
    bin()
        .arg("report")
        .arg(demo())
        .arg("--model")
        .arg(&junk)
        .arg("--out")
        .arg(t.path().join("r2.html"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains(junk.display().to_string()));
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap().flatten() {
        let p = e.path();
        if p.is_dir() {
            copy_dir(&p, &to.join(e.file_name()));
        } else if e.file_name() != "session.lock" {
            std::fs::copy(&p, to.join(e.file_name())).unwrap();
        }
    }
}

/// A session's run is reported with its settings, its critical speed (the simulated Jeffcott
/// rotor of rotor-notes §D1: 3020.96 rpm peak of the displacement response; the acceleration
/// measured here peaks a little higher, within 1 %) and the run cautions; a `--run` that cannot
/// be read is reported as such, the report is still written.
#[test]
fn a_sessions_runs_are_reported_with_their_critical_speeds() {
    let t = tempfile::tempdir().unwrap();
    let session = t.path().join("s");
    copy_dir(&demo(), &session);
    let runs = session.join("runs");
    std::fs::create_dir_all(&runs).unwrap();
    // A slow coast-down, so the sweep does not move the peak (rotor-notes §C6).
    let sc = tapgrid::sim::run::RunScenario {
        duration_s: 150.0,
        sample_rate_hz: 8_000,
        ..Default::default()
    };
    sc.write(&runs).unwrap();
    let mut entry = tapgrid::capture::run::saved_run(1, "coast-down, outboard bearing, vertical");
    entry.recorded = "2026-12-04 10:00 UTC".into();
    tapgrid::capture::run::add_to_session(&session, &runs.join("run.wav"), entry).unwrap();
    let mono = t.path().join("mono.wav");
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: 8000,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(&mono, spec).unwrap();
    for _ in 0..8000 {
        w.write_sample(0i16).unwrap();
    }
    w.finalize().unwrap();
    let page = t.path().join("r.html");
    bin()
        .arg("report")
        .arg(&session)
        .arg("--out")
        .arg(&page)
        .arg("--run")
        .arg(&mono)
        .assert()
        .success();
    let html = std::fs::read_to_string(&page).unwrap();
    let i = html
        .find("<h2>Run-up and coast-down</h2>")
        .expect("the section");
    let sec = &html[i..];
    assert!(sec.contains("Recording a run means a machine turning"));
    assert!(sec.contains("coast-down, outboard bearing, vertical"));
    assert!(sec.contains("recorded 2026-12-04 10:00 UTC"));
    let row = sec.find("<tr><td>").expect("a critical speed row");
    let rpm: f64 = sec[row + 8..].split('<').next().unwrap().parse().unwrap();
    assert!((rpm / 3020.96 - 1.0).abs() < 0.01, "{rpm}");
    assert!(sec.contains("mono.wav") && sec.contains("could not be tracked"));
    assert!(
        sec.contains("channel"),
        "the mono file's error names its channels"
    );
}

/// The test record entered once (`tapgrid report-details`) is kept in the session and printed
/// by the report with a sign-off block — in HTML and in PDF (common practice: a report names
/// who tested, where, with which calibrated instruments, and leaves room to sign).
#[test]
fn the_test_record_and_sign_off_reach_the_html_and_the_pdf() {
    let t = tempfile::tempdir().unwrap();
    let session = t.path().join("s");
    copy_dir(&demo(), &session);
    bin()
        .arg("report-details")
        .arg(&session)
        .args(["--operator", "A. Tester", "--reviewer", "B. Reviewer"])
        .args(["--site", "Repair shop, bay 2", "--date", "2026-12-04"])
        .args([
            "--instrument",
            "hammer|impact hammer|H-1042|2026-03-11|2.25 mV/N",
        ])
        .args([
            "--instrument",
            "accelerometer|IEPE 100 mV/g|A-5531|2026-05-02",
        ])
        .assert()
        .success();
    let s = tapgrid::session::Session::open(&session).unwrap();
    assert_eq!(s.manifest.report.instruments.len(), 2);
    assert_eq!(s.manifest.report.instruments[1].serial, "A-5531");
    let html = t.path().join("r.html");
    let pdf = t.path().join("r.pdf");
    bin()
        .arg("report")
        .arg(&session)
        .arg("--out")
        .arg(&html)
        .arg("--pdf")
        .arg(&pdf)
        .assert()
        .success();
    let page = std::fs::read_to_string(&html).unwrap();
    for needle in [
        "<h2>Test record</h2>",
        "A. Tester",
        "Repair shop, bay 2",
        "H-1042",
        "2026-05-02",
        "<h2>Sign-off</h2>",
        "B. Reviewer",
    ] {
        assert!(page.contains(needle), "{needle}");
    }
    // The PDF: a complete file (header, cross-reference table, trailer), its pages counted in
    // the page tree, and the record's text in its content streams (zlib, RFC 1950, inflated
    // here with miniz_oxide).
    let bytes = std::fs::read(&pdf).unwrap();
    assert!(bytes.starts_with(b"%PDF-"));
    let text = String::from_utf8_lossy(&bytes).into_owned();
    assert!(text.contains("/FlateDecode"));
    let contents = inflate_streams(&bytes);
    assert!(text.contains("xref") && text.contains("trailer") && text.contains("%%EOF"));
    let pages = text.matches("/Type /Page\n").count() + text.matches("/Type /Page ").count();
    assert!(pages >= 3, "{pages} pages");
    for needle in [
        "(A. Tester)",
        "(H-1042)",
        "(Sign-off)",
        "(Reviewed by)",
        "(Modes)",
    ] {
        assert!(contents.contains(needle), "{needle}");
    }
    // --out FILE.pdf writes the PDF alone.
    let only = t.path().join("only.pdf");
    bin()
        .arg("report")
        .arg(&session)
        .arg("--out")
        .arg(&only)
        .assert()
        .success();
    let only = std::fs::read(&only).unwrap();
    assert!(only.starts_with(b"%PDF-"));
    assert!(inflate_streams(&only).contains("(Sign-off)"));
    // A malformed instrument is refused, naming the option.
    bin()
        .arg("report-details")
        .arg(&session)
        .args(["--instrument", "|no role"])
        .assert()
        .failure()
        .stderr(predicate::str::contains("--instrument"));
}

/// Every deflated stream of a PDF, inflated and joined (as text).
fn inflate_streams(pdf: &[u8]) -> String {
    let mut out = String::new();
    let mut at = 0;
    while let Some(i) = find(&pdf[at..], b"stream\n") {
        let start = at + i + b"stream\n".len();
        let Some(j) = find(&pdf[start..], b"\nendstream") else {
            break;
        };
        if let Ok(data) = miniz_oxide::inflate::decompress_to_vec_zlib(&pdf[start..start + j]) {
            out.push_str(&String::from_utf8_lossy(&data));
        }
        at = start + j + b"\nendstream".len();
    }
    out
}

fn find(hay: &[u8], needle: &[u8]) -> Option<usize> {
    hay.windows(needle.len()).position(|w| w == needle)
}
