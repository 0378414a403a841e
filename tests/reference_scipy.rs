//! H1, H2 and coherence against SciPy (scipy.signal.welch / csd / coherence) on the same records.
//! Fixture written by scripts/make_scipy_fixtures.py; the SciPy version is recorded inside it.

#![allow(clippy::unwrap_used, clippy::expect_used)]

use serde_json::Value;
use tapgrid::Complex64;
use tapgrid::setup::Estimator;
use tapgrid::signal::{CrossSpectra, SpectrumPlan};

fn col(v: &Value, k: &str) -> Vec<f64> {
    v[k].as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

fn rel(a: Complex64, b: Complex64) -> f64 {
    (a - b).norm() / b.norm().max(1e-300)
}

#[test]
fn h1_h2_coherence_match_scipy_to_1e9() {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/scipy_frf.json"
    ))
    .unwrap();
    let v: Value = serde_json::from_str(&text).unwrap();
    let n = v["n"].as_u64().unwrap() as usize;
    let fs = v["fs"].as_f64().unwrap();
    assert!(v["scipy_version"].as_str().is_some());
    let mut plan = SpectrumPlan::new(n);
    let lines = 0..n / 2 + 1;
    let mut sums = CrossSpectra::new(lines.len());
    let recs = |k: &str| -> Vec<Vec<f64>> {
        v[k].as_array()
            .unwrap()
            .iter()
            .map(|r| {
                r.as_array()
                    .unwrap()
                    .iter()
                    .map(|x| x.as_f64().unwrap())
                    .collect()
            })
            .collect()
    };
    for (a, b) in recs("a").iter().zip(recs("b").iter()) {
        let sa = plan.lines(a, 1.0 / fs, lines.clone());
        let sb = plan.lines(b, 1.0 / fs, lines.clone());
        sums.add(&sa, &sb);
    }
    let h1 = sums.estimate(Estimator::H1);
    let h2 = sums.estimate(Estimator::H2);
    let coh = sums.coherence();
    let (h1r, h1i, h2r, h2i, c) = (
        col(&v, "h1_re"),
        col(&v, "h1_im"),
        col(&v, "h2_re"),
        col(&v, "h2_im"),
        col(&v, "coherence"),
    );
    let f = col(&v, "frequency_hz");
    let mut worst = 0.0f64;
    // DC and Nyquist lines of a zero-mean boxcar record are near zero in both tools; skip them.
    for k in 1..n / 2 {
        assert!((f[k] - k as f64 * fs / n as f64).abs() < 1e-9);
        let e1 = rel(h1[k], Complex64::new(h1r[k], h1i[k]));
        let e2 = rel(h2[k], Complex64::new(h2r[k], h2i[k]));
        let ec = (coh[k] - c[k]).abs() / c[k];
        worst = worst.max(e1).max(e2).max(ec);
    }
    assert!(worst < 1e-9, "worst relative difference {worst:e}");
}
