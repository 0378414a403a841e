//! Records no bench would make on purpose must neither hang nor panic any stage: each goes
//! through the whole chain (hits, verdicts, carry-over, AC coupling, FRF, modal fit) in both
//! layouts on a worker thread, and the test fails if any does not return within a generous
//! watchdog. Speed itself is measured in the benchmarks, not here.

#![allow(clippy::unwrap_used, clippy::expect_used)]

use std::collections::BTreeMap;
use std::sync::mpsc;
use std::time::Duration;

use tapgrid::acquire::wav::{SampleEncoding, write_channels};
use tapgrid::acquire::wavset::WavSet;
use tapgrid::analysis::{self, Dataset, StationAnalysis};
use tapgrid::modal::{FrfSet, ModalSettings, extract};
use tapgrid::setup::{Layout, Setup};
use tapgrid::signal::analyze_station;
use tapgrid::sim::Rng;

const FS: u32 = 16_000;
const WATCHDOG: Duration = Duration::from_secs(60);

fn records() -> Vec<(&'static str, Vec<f64>, Vec<f64>)> {
    let n = 4 * FS as usize;
    let mut rng = Rng::new(3);
    let noise: Vec<f64> = (0..n).map(|_| 0.3 * rng.normal()).collect();
    let noise_b: Vec<f64> = (0..n).map(|_| 0.3 * rng.normal()).collect();
    let square: Vec<f64> = (0..n)
        .map(|i| if (i / 400) % 2 == 0 { 1.0 } else { -1.0 })
        .collect();
    let mut spike = vec![0.0; n];
    spike[FS as usize] = 0.9;
    let mut spikes = vec![0.0; n];
    for k in 1..4 {
        spikes[k * FS as usize] = 0.9;
    }
    let mut nan = noise.clone();
    for i in (FS as usize..n).step_by(997) {
        nan[i] = f64::NAN;
    }
    let mut inf = spikes.clone();
    inf[2 * FS as usize + 10] = f64::INFINITY;
    inf[2 * FS as usize + 11] = f64::NEG_INFINITY;
    // Taps whose response is pure noise (nothing correlated with the force).
    vec![
        ("zeros", vec![0.0; n], vec![0.0; n]),
        ("constant", vec![0.5; n], vec![0.5; n]),
        ("dc only", vec![-0.2; n], vec![0.7; n]),
        ("pure noise", noise.clone(), noise_b.clone()),
        ("full-scale square wave", square.clone(), square),
        ("nan in both", nan.clone(), nan),
        ("infinities", inf.clone(), inf.clone()),
        ("single-sample spike", spike.clone(), spike),
        ("spikes, silent response", spikes.clone(), vec![0.0; n]),
        ("spikes, noise response", spikes, noise_b),
        ("empty", vec![], vec![]),
        ("one sample", vec![0.5], vec![0.5]),
    ]
}

fn chain(a: &[f64], b: &[f64], layout: Layout) {
    let setup = Setup {
        layout,
        band_hz: Some([20.0, 6000.0]),
        ..Setup::default()
    };
    let Ok(res) = analyze_station(a, b, FS, &setup, &BTreeMap::new(), &mut None) else {
        return;
    };
    let analysis = analysis::Analysis {
        setup,
        sample_rate_hz: FS,
        stations: (1..=3)
            .map(|s| StationAnalysis {
                station: s,
                position_m: s as f64 * 0.1,
                position_source: tapgrid::acquire::wavset::PositionSource::Spacing,
                path: std::path::PathBuf::new(),
                result: res.clone(),
            })
            .collect(),
        notes: vec![],
    };
    let _ = analysis.warnings();
    if let Some(set) = FrfSet::from_analysis(&analysis) {
        let _ = extract(&set, &ModalSettings::default());
    }
}

#[test]
fn every_stage_returns_on_adversarial_records() {
    for (name, a, b) in records() {
        for layout in [Layout::Hammer, Layout::Sensor] {
            let (tx, rx) = mpsc::channel();
            let (a, b) = (a.clone(), b.clone());
            std::thread::spawn(move || {
                let r = std::panic::catch_unwind(|| chain(&a, &b, layout));
                let _ = tx.send(r.is_ok());
            });
            match rx.recv_timeout(WATCHDOG) {
                Ok(true) => {}
                Ok(false) => panic!("{name} ({layout:?}): a stage panicked"),
                Err(_) => panic!("{name} ({layout:?}): no answer within {WATCHDOG:?}"),
            }
        }
    }
}

#[test]
fn a_damaged_float_recording_costs_its_hits_not_the_test() {
    // Two good stations and one whose float recording holds NaN over one of its taps: the
    // analysis returns, the damaged hit is rejected with its reason, the others are kept.
    let dir = tempfile::tempdir().unwrap();
    let n = 3 * FS as usize;
    for st in 1..=3u32 {
        let mut a = vec![0.0; n];
        let mut b = vec![0.0; n];
        for k in 0..3 {
            let t0 = (0.5 + k as f64 * 0.8) * FS as f64;
            for i in 0..8 {
                a[t0 as usize + i] = 0.5 * (std::f64::consts::PI * i as f64 / 8.0).sin();
            }
            for i in 0..(0.6 * FS as f64) as usize {
                let t = i as f64 / FS as f64;
                b[t0 as usize + i] += 0.3
                    * (-(20.0 * t)).exp()
                    * (std::f64::consts::TAU * (400.0 + 30.0 * st as f64) * t).sin();
            }
        }
        if st == 2 {
            b[(1.5 * FS as f64) as usize] = f64::NAN;
        }
        write_channels(
            &dir.path().join(format!("station-{st}.wav")),
            FS,
            SampleEncoding::Float32,
            &[&a, &b],
        )
        .unwrap();
    }
    let set = WavSet::scan(dir.path(), 0.1).unwrap();
    let setup = Setup {
        band_hz: Some([50.0, 2000.0]),
        ..Setup::default()
    };
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        let _ = tx.send(analysis::run(&Dataset::from_wavset(&set), &setup));
    });
    let a = rx
        .recv_timeout(WATCHDOG)
        .expect("returns")
        .expect("analyses");
    let s2 = &a.stations[1].result;
    assert_eq!(s2.hits.len(), 3);
    let words: Vec<Vec<&str>> = s2
        .hits
        .iter()
        .map(|h| h.reasons.iter().map(|r| r.word()).collect())
        .collect();
    assert!(words[1].contains(&"corrupt_samples"), "{words:?}");
    assert!(s2.hits[0].accepted && s2.hits[2].accepted, "{words:?}");
    assert!(a.warnings().iter().any(|w| w.contains("not numbers")));
}
