//! Calibration helpers against their definitions: the rms of a sine is its amplitude/√2
//! (textbook); a free rigid mass has accelerance 1/m (Newton's second law; the mass calibration
//! of Brown, Allemang & Phillips 2015); one signal into both inputs gives H = 1 (loopback check,
//! common practice).

#![allow(clippy::unwrap_used, clippy::expect_used)]

use tapgrid::setup::Setup;
use tapgrid::signal::calibration::{loopback, mass_check, tone};

const FS: u32 = 48_000;

#[test]
fn tone_rms_is_amplitude_over_root_two() {
    let n = 2 * FS as usize;
    let x: Vec<f64> = (0..n)
        .map(|i| {
            0.01 + 0.3 * (2.0 * std::f64::consts::PI * 159.2 * i as f64 / FS as f64 + 0.4).sin()
        })
        .collect();
    let t = tone(&x, FS, 159.2).unwrap();
    assert!((t.rms_fs - 0.3 / 2f64.sqrt()).abs() < 1e-6, "{}", t.rms_fs);
    assert!((t.frequency_hz - 159.2).abs() < 0.01);
    assert!(t.purity > 0.999);
    // A reference shaker off by 0.5 % in frequency is still found.
    let t2 = tone(&x, FS, 160.0).unwrap();
    assert!((t2.rms_fs - 0.3 / 2f64.sqrt()).abs() < 1e-5);
    // 10 m/s² rms reading 0.2121 FS at 2 V full scale: 42.43 mV/(m/s²).
    let mv_per_ms2 = t.rms_fs * 2.0 / 10.0 * 1e3;
    assert!((mv_per_ms2 - 42.426).abs() < 0.01);
    assert!(tone(&vec![0.0; n], FS, 159.2).is_err());
}

fn taps(m_true: f64) -> (Vec<f64>, Vec<f64>) {
    let n = 6 * FS as usize;
    let mut a = vec![0.0; n];
    let mut seed = 12345u64;
    let mut noise = || {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        ((seed >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 1e-5
    };
    for k in 0..3 {
        let t0 = (0.5 + 1.6 * k as f64) * FS as f64;
        let w = (0.0004 * FS as f64) as usize;
        for i in 0..w {
            a[t0 as usize + i] = 0.5 * (std::f64::consts::PI * i as f64 / w as f64).sin();
        }
    }
    for v in a.iter_mut() {
        *v += noise();
    }
    // Same sensitivity on both channels: volts of acceleration = volts of force / m.
    let b = a.iter().map(|f| f / m_true + noise()).collect();
    (a, b)
}

#[test]
fn mass_check_reads_one_over_m() {
    let setup = Setup {
        band_hz: Some([20.0, 2000.0]),
        ..Setup::default()
    };
    let (a, b) = taps(2.5);
    let r = mass_check(&a, &b, FS, &setup, 2.5).unwrap();
    assert_eq!(r.hits, 3);
    assert!((r.ratio - 1.0).abs() < 0.01, "ratio {}", r.ratio);
    assert!(r.spread < 0.01);
    // A mass entered 10 % too high reads 10 % high.
    let r = mass_check(&a, &b, FS, &setup, 2.75).unwrap();
    assert!((r.ratio - 1.1).abs() < 0.012, "ratio {}", r.ratio);
    assert!(mass_check(&a, &b, FS, &setup, 0.0).is_err());
}

#[test]
fn loopback_is_unity_and_catches_inversion() {
    let n = 4 * FS as usize;
    let mut seed = 99u64;
    let x: Vec<f64> = (0..n)
        .map(|_| {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        })
        .collect();
    let r = loopback(&x, &x, FS).unwrap();
    assert!((r.gain - 1.0).abs() < 1e-9 && r.worst_phase_deg < 1e-6 && !r.inverted);
    let inv: Vec<f64> = x.iter().map(|v| -v).collect();
    let r = loopback(&x, &inv, FS).unwrap();
    assert!(r.inverted);
    assert!((r.gain - 1.0).abs() < 1e-9 && r.worst_phase_deg < 1e-6);
    // A 6 dB mismatch shows.
    let half: Vec<f64> = x.iter().map(|v| v * 0.5).collect();
    let r = loopback(&x, &half, FS).unwrap();
    assert!((r.gain - 0.5).abs() < 1e-9);
}
