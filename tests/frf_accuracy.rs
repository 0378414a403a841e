//! FRFs of simulated analytic systems against closed-form accelerance (Ewins 2000), with the
//! force and exponential windows on. The exponential window's effect is the Laplace shift
//! theorem (Fladung 1997, IMAC XV): the windowed records' FRF is s'²α(s') with s' = jω + 1/τ.

#![allow(clippy::unwrap_used, clippy::expect_used)]

mod common;

use std::collections::BTreeMap;

use common::*;
use nalgebra::DMatrix;
use tapgrid::Complex64;
use tapgrid::setup::{Layout, Setup};
use tapgrid::signal::analyze_station;
use tapgrid::signal::window::correct_damping;
use tapgrid::sim::{Pickup, Rng, synthesize};

const TAU: f64 = 2.0 * std::f64::consts::PI;

fn setup_for(rig: &tapgrid::sim::Rig, band: [f64; 2]) -> Setup {
    rig.matching_setup(Layout::Hammer, band)
}

/// Lines at least 5 % in frequency away from every antiresonance (local minimum of |A|).
fn away_from_antiresonances(f: &[f64], mag: &[f64]) -> Vec<bool> {
    let mins: Vec<f64> = (1..mag.len() - 1)
        .filter(|&i| mag[i] < mag[i - 1] && mag[i] < mag[i + 1])
        .map(|i| f[i])
        .collect();
    f.iter()
        .map(|&x| mins.iter().all(|&m| (x - m).abs() > 0.05 * m))
        .collect()
}

/// Worst |dB| and |degrees| of measured / expected over the lines away from antiresonances.
fn worst_error(freq: &[f64], h: &[Complex64], exp: &[Complex64]) -> (f64, f64) {
    let mags: Vec<f64> = exp.iter().map(|c| c.norm()).collect();
    let keep = away_from_antiresonances(freq, &mags);
    (0..exp.len())
        .filter(|&i| keep[i])
        .fold((0.0f64, 0.0f64), |(db, deg), i| {
            let ratio = h[i] / exp[i];
            (
                db.max((20.0 * ratio.norm().log10()).abs()),
                deg.max(ratio.arg().to_degrees().abs()),
            )
        })
}

fn check(model: &MatrixModel, resp: usize, force: usize, fs: u32, band: [f64; 2]) -> (f64, f64) {
    // A 24-bit-grade chain (10 nV noise): the test is of the windows and estimators, not of noise.
    let rig = tapgrid::sim::Rig {
        noise_volts: [1e-8, 1e-8],
        ..clean_rig(fs)
    };
    // Hits 4 s apart: the slowest mode (σ = 2.5 /s) has rung down to 5e-5 before the next record.
    let imp = impacts(3, 0.2, 4.0, 200.0, 2e-4);
    let (a, b) = synthesize(
        model,
        Pickup::ForceAndResponse { response: resp },
        force,
        &imp,
        12.2,
        &rig,
        &mut Rng::new(7),
    );
    let setup = setup_for(&rig, band);
    let r = analyze_station(&a, &b, fs, &setup, &BTreeMap::new(), &mut None).unwrap();
    assert_eq!(
        r.hits.iter().filter(|h| h.accepted).count(),
        3,
        "{:?}",
        r.hits
    );
    let frf = r.frf.unwrap();
    let exp: Vec<Complex64> = frf
        .freq_hz
        .iter()
        .map(|&f| model.windowed_accelerance(resp, force, TAU * f, r.exp_tau_s))
        .collect();
    worst_error(&frf.freq_hz, &frf.h, &exp)
}

fn three_dof() -> MatrixModel {
    // Grounded chain: m = 1, 1.5, 0.8 kg; springs 4, 3, 2 MN/m; Rayleigh damping C = 5M + 2e-6K.
    let m = DMatrix::from_diagonal(&nalgebra::DVector::from_vec(vec![1.0, 1.5, 0.8]));
    let (k1, k2, k3) = (4e6, 3e6, 2e6);
    let k = DMatrix::from_row_slice(3, 3, &[k1 + k2, -k2, 0.0, -k2, k2 + k3, -k3, 0.0, -k3, k3]);
    let c = &m * 5.0 + &k * 2e-6;
    MatrixModel { m, c, k }
}

#[test]
fn sdof_accelerance_within_half_db_and_two_degrees() {
    // m = 1 kg, f_n = 160 Hz, ζ = 1 %.
    let wn = TAU * 160.0;
    let model = MatrixModel {
        m: DMatrix::from_element(1, 1, 1.0),
        c: DMatrix::from_element(1, 1, 2.0 * 0.01 * wn),
        k: DMatrix::from_element(1, 1, wn * wn),
    };
    let (db, deg) = check(&model, 0, 0, 16384, [20.0, 2000.0]);
    assert!(db < 0.5 && deg < 2.0, "SDOF worst {db:.3} dB, {deg:.3}°");
}

#[test]
fn three_dof_driving_point_and_transfer_within_half_db_and_two_degrees() {
    let model = three_dof();
    for (r, f) in [(0, 0), (2, 0), (1, 2)] {
        // Modes at 125.3, 312.9, 459.9 Hz (scipy.linalg.eigh). Band to 3× the highest mode: far
        // above it a transfer accelerance sits > 45 dB below its peaks, where the leakage of the
        // record's residual ringing (1 % exponential end value) reaches a degree of phase.
        let (db, deg) = check(&model, r, f, 16384, [20.0, 1400.0]);
        assert!(
            db < 0.5 && deg < 2.0,
            "H({r},{f}) worst {db:.3} dB, {deg:.3}°"
        );
    }
}

#[test]
fn ac_coupling_is_found_and_undone_down_to_five_times_its_corner() {
    // A 4 Hz first-order AC coupling on both channels: uncorrected, the response keeps +11° at
    // 20 Hz (first-order high-pass, derived: +45° at f_c, +5.7° at 10 f_c). tapgrid reads the corner off the hammer's
    // tail and divides it out; the FRF then matches the closed form again from 20 Hz.
    let model = three_dof();
    let rig = tapgrid::sim::Rig {
        noise_volts: [1e-8, 1e-8],
        ac_corner_hz: Some(4.0),
        ..clean_rig(16384)
    };
    let imp = impacts(3, 0.2, 4.0, 200.0, 2e-4);
    let (a, b) = synthesize(
        &model,
        Pickup::ForceAndResponse { response: 0 },
        0,
        &imp,
        12.2,
        &rig,
        &mut Rng::new(7),
    );
    let setup = setup_for(&rig, [20.0, 1400.0]);
    let r = analyze_station(&a, &b, 16384, &setup, &BTreeMap::new(), &mut None).unwrap();
    let fc = r.ac_corner_hz.expect("corner found");
    assert!((fc / 4.0 - 1.0).abs() < 0.02, "{fc}");
    let frf = r.frf.unwrap();
    let exp: Vec<Complex64> = frf
        .freq_hz
        .iter()
        .map(|&f| model.windowed_accelerance(0, 0, TAU * f, r.exp_tau_s))
        .collect();
    let (_, worst) = worst_error(&frf.freq_hz, &frf.h, &exp);
    assert!(worst < 2.0, "worst phase {worst:.2}°");
    // Off, the error is there to see.
    let off = Setup {
        ac_coupling: tapgrid::setup::AcCoupling::None,
        ..setup
    };
    let r = analyze_station(&a, &b, 16384, &off, &BTreeMap::new(), &mut None).unwrap();
    let h20 = r.frf.unwrap().h[0] / exp[0];
    assert!(h20.arg().to_degrees() > 8.0, "{}", h20.arg().to_degrees());
}

#[test]
fn driving_point_accelerance_has_positive_imaginary_part_at_resonances() {
    // Sign convention (Ewins 2000, from memory): Im A_kk > 0 at every resonance.
    let model = three_dof();
    let rig = clean_rig(16384);
    let imp = impacts(3, 0.2, 2.0, 200.0, 2e-4);
    let (a, b) = synthesize(
        &model,
        Pickup::ForceAndResponse { response: 1 },
        1,
        &imp,
        6.2,
        &rig,
        &mut Rng::new(3),
    );
    let r = analyze_station(
        &a,
        &b,
        16384,
        &setup_for(&rig, [20.0, 3000.0]),
        &BTreeMap::new(),
        &mut None,
    )
    .unwrap();
    let frf = r.frf.unwrap();
    // Undamped natural frequencies from the generalized eigenproblem (nalgebra).
    let l = model.m.clone().cholesky().unwrap();
    let linv = l.l().try_inverse().unwrap();
    let a_mat = &linv * &model.k * linv.transpose();
    let eig = a_mat.symmetric_eigen();
    for w2 in eig.eigenvalues.iter() {
        let f = w2.sqrt() / TAU;
        let i = frf.freq_hz.iter().position(|&x| x >= f).unwrap();
        let pick = if (frf.freq_hz[i] - f).abs() < (frf.freq_hz[i - 1] - f).abs() {
            i
        } else {
            i - 1
        };
        assert!(
            frf.h[pick].im > 0.0,
            "Im A at {f:.1} Hz is {}",
            frf.h[pick].im
        );
    }
}

#[test]
fn exponential_window_shifts_the_pole_by_one_over_tau_and_correction_undoes_it() {
    // SDOF f_n = 200 Hz, ζ = 0.2 %. After the window the measured FRF is that of the pole
    // λ' = λ − 1/τ (Laplace shift); correct_damping must map (f', ζ') back to (f_n, ζ).
    let (fnat, zeta) = (200.0, 0.002);
    let model = sdof(fnat, zeta);
    let rig = clean_rig(16384);
    let imp = impacts(2, 0.2, 2.5, 200.0, 2e-4);
    let (a, b) = record(&model, &imp, 5.2, &rig, 11);
    let r = analyze_station(
        &a,
        &b,
        16384,
        &setup_for(&rig, [50.0, 600.0]),
        &BTreeMap::new(),
        &mut None,
    )
    .unwrap();
    let tau = r.exp_tau_s;
    let frf = r.frf.unwrap();
    let wn = TAU * fnat;
    let lam = Complex64::new(-zeta * wn, wn * (1.0 - zeta * zeta).sqrt());
    let lam_w = lam - 1.0 / tau;
    let (f_w, z_w) = (lam_w.norm() / TAU, -lam_w.re / lam_w.norm());
    // The measured FRF peaks as the shifted pole predicts: half-power width matches ζ'.
    let mags: Vec<f64> = frf.h.iter().map(|c| c.norm()).collect();
    let (ip, &pk) = mags
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(b.1))
        .unwrap();
    let half = pk / 2f64.sqrt();
    let interp = |i0: usize, i1: usize| {
        let (f0, f1, m0, m1) = (frf.freq_hz[i0], frf.freq_hz[i1], mags[i0], mags[i1]);
        f0 + (half - m0) * (f1 - f0) / (m1 - m0)
    };
    let mut lo = ip;
    while mags[lo] > half {
        lo -= 1;
    }
    let mut hi = ip;
    while mags[hi] > half {
        hi += 1;
    }
    let (f1, f2) = (interp(lo, lo + 1), interp(hi - 1, hi));
    let zeta_half_power = (f2 - f1) / (2.0 * fnat);
    assert!(
        (zeta_half_power / z_w - 1.0).abs() < 0.05,
        "half-power ζ {zeta_half_power} vs shifted {z_w}"
    );
    assert!(z_w > 2.0 * zeta, "the window must add visible damping here");
    let (f_back, z_back) = correct_damping(f_w, z_w, tau);
    assert!(
        (f_back / fnat - 1.0).abs() < 1e-12 && (z_back / zeta - 1.0).abs() < 1e-9,
        "{f_back} {z_back}"
    );
}
