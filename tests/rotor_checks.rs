//! The rotor at speed against closed forms and published values. Every check value below is from
//! ../shared/rotor-notes.md, which derives each from a stated equation ([der]) or names the
//! source; the equations themselves are repeated beside each check.

use nalgebra::DMatrix;
use tapgrid::model::beam::{BeamTheory, Disc, Material, Section, Shaft, Support};
use tapgrid::rotor::bearing::{
    BearingLaw, Coefficients, FilmMethod, PlainBearing, short_coefficients, short_sommerfeld,
};
use tapgrid::rotor::campbell::{Solver, campbell};
use tapgrid::rotor::eigen::Whirl;
use tapgrid::rotor::model::{PlacedBearing, Rotor, RotorModel, Unbalance};
use tapgrid::rotor::unbalance::{peaks, response};

const RPM: f64 = 30.0 / std::f64::consts::PI; // rad/s → rpm

fn rel(a: f64, b: f64) -> f64 {
    (a / b - 1.0).abs()
}

/// The simply supported steel shaft of rotor-notes §A7: D = 50 mm, L = 1 m, E = 210 GPa,
/// ρ = 7800 kg/m³, ν = 0.3, pinned ends (u = v = 0 by stiff springs), 40 elements.
fn pinned_shaft(theory: BeamTheory) -> RotorModel {
    let shaft = Shaft {
        material: Material {
            youngs_modulus_pa: 2.1e11,
            density_kg_m3: 7800.0,
            poisson_ratio: 0.3,
        },
        sections: vec![Section {
            length_m: 1.0,
            outer_diameter_m: 0.05,
            inner_diameter_m: 0.0,
            material: None,
        }],
        discs: vec![],
        supports: vec![Support::lateral(0.0, 1e13), Support::lateral(1.0, 1e13)],
    };
    Rotor {
        shaft,
        bearings: vec![],
        unbalances: vec![],
    }
    .assemble(theory, 40, &[])
    .expect("assembles")
}

fn split(modes: &[tapgrid::rotor::eigen::DampedMode]) -> (Vec<f64>, Vec<f64>) {
    let f = modes
        .iter()
        .filter(|m| m.whirl == Whirl::Forward)
        .map(|m| m.frequency_hz)
        .collect();
    let b = modes
        .iter()
        .filter(|m| m.whirl == Whirl::Backward)
        .map(|m| m.frequency_hz)
        .collect();
    (f, b)
}

#[test]
fn spinning_simply_supported_shaft_matches_the_exact_whirl_frequencies() {
    // rotor-notes §A7 [der]: Rayleigh beam (ρA + ρIk²)ω² ∓ 2ρIk²Ωω − EIk⁴ = 0, k = nπ/L;
    // Timoshenko (κGAk² − ρAω²)(EIk² + κGA − ρIω² ± 2ρIΩω) − (κGAk)² = 0.
    for (theory, at_rest, spinning) in [
        (
            BeamTheory::Rayleigh,
            [101.802, 406.272],
            [(101.035, 102.575), (403.218, 409.349)],
        ),
        (
            BeamTheory::Timoshenko,
            [101.574, 402.689],
            [(100.813, 102.339), (399.740, 405.658)],
        ),
    ] {
        let model = pinned_shaft(theory);
        let mut solver = Solver::new(&model, 8);
        let rest = solver.modes_at(0.0, 4).expect("solves");
        for (k, want) in at_rest.iter().enumerate() {
            // Degenerate pair at rest: both members equal the exact value.
            for m in &rest[2 * k..2 * k + 2] {
                assert!(
                    rel(m.frequency_hz, *want) < 3e-5,
                    "{theory:?} at rest: {} vs {want}",
                    m.frequency_hz
                );
                assert!(m.log_dec.abs() < 1e-9, "undamped: δ = {}", m.log_dec);
            }
        }
        let spin = solver.modes_at(30_000.0, 4).expect("solves");
        let (fwd, bwd) = split(&spin);
        assert_eq!((fwd.len(), bwd.len()), (2, 2), "{theory:?}: two of each");
        for (k, (b, f)) in spinning.iter().enumerate() {
            assert!(rel(fwd[k], *f) < 3e-5, "{theory:?} F{k}: {} vs {f}", fwd[k]);
            assert!(rel(bwd[k], *b) < 3e-5, "{theory:?} B{k}: {} vs {b}", bwd[k]);
        }
    }
}

#[test]
fn synchronous_critical_speeds_of_the_rayleigh_shaft() {
    // rotor-notes §A7 [der]: forward √(EIk⁴/(ρA − ρIk²)) = 101.959 Hz, backward
    // √(EIk⁴/(ρA + 3ρIk²)) = 101.646 Hz (n = 1).
    let model = pinned_shaft(BeamTheory::Rayleigh);
    let speeds: Vec<f64> = (0..=20).map(|i| 5000.0 + 100.0 * i as f64).collect();
    let c = campbell(&model, &speeds, 2).expect("campbell");
    let ones: Vec<_> = c.critical_speeds.iter().filter(|c| c.order == 1).collect();
    let fwd = ones
        .iter()
        .find(|c| c.whirl == Whirl::Forward)
        .expect("a forward 1× critical");
    let bwd = ones
        .iter()
        .find(|c| c.whirl == Whirl::Backward)
        .expect("a backward 1× critical");
    assert!(
        rel(fwd.speed_rpm, 101.959 * 60.0) < 3e-5,
        "{}",
        fwd.speed_rpm
    );
    assert!(
        rel(bwd.speed_rpm, 101.646 * 60.0) < 3e-5,
        "{}",
        bwd.speed_rpm
    );
    assert_eq!(
        c.stability_threshold_rpm, None,
        "an undamped rotor is not unstable"
    );
}

#[test]
fn overhung_disc_on_a_cantilever_matches_the_frequency_equation() {
    // rotor-notes §D6 [der]: steel shaft d = 20 mm, L = 0.25 m (EI = 1649.336 N·m²), disc
    // m = 6.12611 kg, Ip = 0.030631, Id = 0.015634 kg·m²;
    // (K11 − mω²)(K22 − Idω² + IpΩω) − K12² = 0. Shaft mass is made negligible (density
    // 10 kg/m³: 8e-4 kg against 6.1 kg), so the tolerance allows 1e-4.
    let shaft = Shaft {
        material: Material {
            youngs_modulus_pa: 2.1e11,
            density_kg_m3: 10.0,
            poisson_ratio: 0.3,
        },
        sections: vec![Section {
            length_m: 0.25,
            outer_diameter_m: 0.02,
            inner_diameter_m: 0.0,
            material: None,
        }],
        discs: vec![Disc {
            position_m: 0.25,
            mass_kg: 6.12611,
            polar_inertia_kg_m2: 0.030631,
            transverse_inertia_kg_m2: 0.015634,
        }],
        supports: vec![Support {
            position_m: 0.0,
            stiffness_n_per_m: 1e13,
            rotational_stiffness_n_m_per_rad: 1e13,
        }],
    };
    let model = Rotor {
        shaft,
        bearings: vec![],
        unbalances: vec![],
    }
    .assemble(BeamTheory::EulerBernoulli, 1, &[])
    .expect("assembles");
    let mut solver = Solver::new(&model, 4);
    for (rpm, want_b, want_f) in [
        (3000.0, [30.2814, 177.9724], [38.8538, 267.3592]),
        (6000.0, [26.2486, 150.8989], [42.7951, 330.2708]),
        (12000.0, [19.7215, 119.6995], [49.1949, 482.0629]),
    ] {
        let modes = solver.modes_at(rpm, 4).expect("solves");
        let (f, b) = split(&modes);
        for (got, want) in f.iter().zip(want_f).chain(b.iter().zip(want_b)) {
            assert!(rel(*got, want) < 1e-4, "{rpm} rpm: {got} vs {want}");
        }
    }
    let at_rest = solver.modes_at(0.0, 4).expect("solves");
    assert!(rel(at_rest[0].frequency_hz, 34.5877) < 1e-4);
    assert!(rel(at_rest[2].frequency_hz, 216.3251) < 1e-4);
    // Critical speeds (§D6): forward only at 2270.20 rpm; backward at 1909.81 and 8198.89 rpm.
    let speeds: Vec<f64> = (0..=60).map(|i| 200.0 * i as f64).collect();
    let c = campbell(&model, &speeds, 4).expect("campbell");
    let ones: Vec<_> = c.critical_speeds.iter().filter(|c| c.order == 1).collect();
    let fwd: Vec<f64> = ones
        .iter()
        .filter(|c| c.whirl == Whirl::Forward)
        .map(|c| c.speed_rpm)
        .collect();
    let bwd: Vec<f64> = ones
        .iter()
        .filter(|c| c.whirl == Whirl::Backward)
        .map(|c| c.speed_rpm)
        .collect();
    assert_eq!(fwd.len(), 1, "{fwd:?}");
    assert!(rel(fwd[0], 2270.20) < 1e-4, "{fwd:?}");
    assert_eq!(bwd.len(), 2, "{bwd:?}");
    assert!(
        rel(bwd[0], 1909.81) < 1e-4 && rel(bwd[1], 8198.89) < 1e-4,
        "{bwd:?}"
    );
}

/// A one-node model with 4 DOFs: translations of mass `m` (per plane), rotations made stiff
/// and light so they stay far above the modes of interest.
fn point_model(
    m: f64,
    k: [[f64; 2]; 2],
    c: [[f64; 2]; 2],
    bearings: Vec<BearingLaw>,
) -> RotorModel {
    let mut mm = DMatrix::zeros(4, 4);
    let mut kk = DMatrix::zeros(4, 4);
    let mut cc = DMatrix::zeros(4, 4);
    mm[(0, 0)] = m;
    mm[(1, 1)] = m;
    mm[(2, 2)] = 1e-3;
    mm[(3, 3)] = 1e-3;
    kk[(2, 2)] = 1e12;
    kk[(3, 3)] = 1e12;
    for i in 0..2 {
        for j in 0..2 {
            kk[(i, j)] = k[i][j];
            cc[(i, j)] = c[i][j];
        }
    }
    let nb = bearings.len();
    RotorModel {
        nodes_m: vec![0.0],
        m: mm,
        k: kk,
        c: cc,
        g: DMatrix::zeros(4, 4),
        bearing_nodes: vec![0; nb],
        bearings,
    }
}

#[test]
fn jeffcott_rotor_unbalance_response_and_amplification_factor() {
    // rotor-notes §D1 [der]: m = 10 kg, k = 1e6 N/m, ζ = 0.02 (c = 126.491 N·s/m),
    // U = 100 g·mm; |X| = e r²/√((1−r²)² + (2ζr)²), lag = atan2(2ζr, 1 − r²).
    let model = point_model(
        10.0,
        [[0.0; 2]; 2],
        [[0.0; 2]; 2],
        vec![BearingLaw::Constant(Coefficients::isotropic(
            1e6,
            126.491_106,
        ))],
    );
    let u = [Unbalance {
        position_m: 0.0,
        amount_kg_m: 1e-4,
        angle_deg: 0.0,
    }];
    let wn_rpm = 316.2278 * RPM;
    for (r, amp_um, lag) in [
        (0.5, 3.3321, 1.5275),
        (0.9, 41.8863, 10.7289),
        (1.0, 250.0, 90.0),
        (1.1, 56.3945, 168.1664),
        (2.0, 13.3286, 178.4725),
        (5.0, 10.4163, 179.5225),
    ] {
        let p = response(&model, &u, &[r * wn_rpm], &[0.0]).expect("solves")[0];
        assert!(
            rel(p.amplitude_m * 1e6, amp_um) < 1e-4,
            "r = {r}: {}",
            p.amplitude_m
        );
        assert!(
            (p.phase_deg - lag).abs() < 1e-3,
            "r = {r}: lag {}",
            p.phase_deg
        );
        // Isotropic: a circular forward orbit, y lags x by 90°.
        assert!(p.forward && rel(p.major_m, p.amplitude_m) < 1e-9);
        assert!(((p.phase_y_deg - p.phase_deg).rem_euclid(360.0) - 90.0).abs() < 1e-6);
    }
    // Peak 250.0500 µm at 3020.96 rpm; half-power speeds 2962.26 and 3083.29 rpm; AF = 24.960.
    let speeds: Vec<f64> = (0..=1200).map(|i| 2800.0 + 0.5 * i as f64).collect();
    let curve = response(&model, &u, &speeds, &[0.0]).expect("solves");
    let amps: Vec<f64> = curve.iter().map(|p| p.amplitude_m).collect();
    let pk = peaks(0.0, &speeds, &amps);
    assert_eq!(pk.len(), 1);
    let pk = pk[0];
    assert!((pk.speed_rpm - 3020.96).abs() < 0.05, "{}", pk.speed_rpm);
    assert!(
        rel(pk.amplitude_m * 1e6, 250.05) < 1e-4,
        "{}",
        pk.amplitude_m
    );
    assert!((pk.n1_rpm.expect("N1") - 2962.26).abs() < 0.05);
    assert!((pk.n2_rpm.expect("N2") - 3083.29).abs() < 0.05);
    assert!((pk.amplification_factor.expect("AF") - 24.960).abs() < 0.01);
    // The damped mode: ζ = 0.02, δ = 2πζ/√(1−ζ²) = 0.12569.
    let mut s = Solver::new(&model, 2);
    let m = &s.modes_at(1000.0, 2).expect("solves")[0];
    assert!((m.damping_ratio - 0.02).abs() < 1e-9 && (m.log_dec - 0.12569).abs() < 1e-5);
}

#[test]
fn textbook_unbalance_problem() {
    // Rao, Mechanical Vibrations (problem statement via rotor-notes §D1; from memory): k = 3.75
    // MN/m, m = 60 kg, e = 2000 µm, ζ = 0.05, 3600 rpm → r = 1.50796, |X| = 3545.2 µm.
    let (m, k, zeta): (f64, f64, f64) = (60.0, 3.75e6, 0.05);
    let c = 2.0 * zeta * (k * m).sqrt();
    let model = point_model(
        m,
        [[0.0; 2]; 2],
        [[0.0; 2]; 2],
        vec![BearingLaw::Constant(Coefficients::isotropic(k, c))],
    );
    let u = [Unbalance {
        position_m: 0.0,
        amount_kg_m: m * 2000e-6,
        angle_deg: 30.0,
    }];
    let p = response(&model, &u, &[3600.0], &[0.0]).expect("solves")[0];
    assert!(rel(p.major_m * 1e6, 3545.2) < 1e-4, "{}", p.major_m);
}

#[test]
fn rigid_rotor_on_anisotropic_bearings_whirls_backward_between_its_criticals() {
    // rotor-notes §D4 [der]: m = 20 kg on two bearings k_x = 1e6, k_y = 2e6 N/m each;
    // criticals 316.2278 and 447.2136 rad/s; at 380 rad/s x = −3.2523e, y = +2.5971e, backward.
    let k = [[2e6, 0.0], [0.0, 4e6]];
    let model = point_model(20.0, k, [[0.0; 2]; 2], vec![]);
    let e = 1e-5;
    let u = [Unbalance {
        position_m: 0.0,
        amount_kg_m: 20.0 * e,
        angle_deg: 0.0,
    }];
    let at = |w: f64| response(&model, &u, &[w * RPM], &[0.0]).expect("solves")[0];
    let p = at(380.0);
    assert!(rel(p.amplitude_m / e, 3.2523) < 1e-4 && rel(p.amplitude_y_m / e, 2.5971) < 1e-4);
    assert!(!p.forward, "backward between the split criticals");
    assert!(rel(p.major_m / e, 0.3276 + 2.9247) < 1e-3);
    assert!(at(200.0).forward && at(600.0).forward);
    let mut s = Solver::new(&model, 2);
    let modes = s.modes_at(0.0, 2).expect("solves");
    assert!(rel(modes[0].frequency_hz * 2.0 * std::f64::consts::PI, 316.2278) < 1e-6);
    assert!(rel(modes[1].frequency_hz * 2.0 * std::f64::consts::PI, 447.2136) < 1e-6);
}

#[test]
fn internal_damping_threshold() {
    // rotor-notes §D3 [der]: m r̈ + (c_n + c_i) ṙ + (k − iΩc_i) r = 0 (r = u + iv), threshold
    // Ω_th = ω_n(1 + c_n/c_i) = 3ω_n for ζ_n = 0.02, ζ_i = 0.01: 948.683 rad/s (9059.3 rpm).
    // The rotating damping's circulatory term enters as a speed-tabulated skew stiffness.
    let (m, k): (f64, f64) = (10.0, 1e6);
    let wn = (k / m).sqrt();
    let (cn, ci) = (2.0 * 0.02 * m * wn, 2.0 * 0.01 * m * wn);
    let speeds: Vec<f64> = (0..=40).map(|i| 300.0 * i as f64).collect();
    let table = speeds
        .iter()
        .map(|&n| {
            let w = n / RPM;
            (
                n,
                Coefficients {
                    k_n_per_m: [[0.0, w * ci], [-w * ci, 0.0]],
                    c_n_s_per_m: [[0.0; 2]; 2],
                },
            )
        })
        .collect();
    let model = point_model(
        m,
        [[k, 0.0], [0.0, k]],
        [[cn + ci, 0.0], [0.0, cn + ci]],
        vec![BearingLaw::Table(table)],
    );
    let c = campbell(&model, &speeds, 2).expect("campbell");
    let th = c.stability_threshold_rpm.expect("a threshold");
    assert!(rel(th, 948.683 * RPM) < 1e-5, "{th}");
}

#[test]
fn damped_flexible_supports_reach_the_best_damping_at_the_closed_form_optimum() {
    // rotor-notes §D2 [der]: shaft k_s = 1e6 N/m, m = 10 kg, two supports k_b = 1e6 N/m each
    // with dampers c_b; at c_b = 4286.16 N·s/m ζ = 0.11237; at c_b = 1000, ζ = 0.04207; at 1e5,
    // 0.00790. Massless support points are given 1e-4 kg (their own mode lies far above).
    for (cb, zeta) in [(4286.16, 0.11237), (1000.0, 0.04207), (1e5, 0.00790)] {
        let (m, ks, kb) = (10.0, 1e6, 2e6);
        let mut mm = DMatrix::zeros(8, 8);
        let mut kk = DMatrix::zeros(8, 8);
        let mut cc = DMatrix::zeros(8, 8);
        // Node 0: the disc; node 1: the support point (translations) — rotations stiff, light.
        for (node, mass) in [(0, m), (1, 1e-4)] {
            let b = 4 * node;
            mm[(b, b)] = mass;
            mm[(b + 1, b + 1)] = mass;
            mm[(b + 2, b + 2)] = 1e-3;
            mm[(b + 3, b + 3)] = 1e-3;
            kk[(b + 2, b + 2)] = 1e12;
            kk[(b + 3, b + 3)] = 1e12;
        }
        for d in 0..2 {
            kk[(d, d)] += ks;
            kk[(4 + d, 4 + d)] += ks + kb;
            kk[(d, 4 + d)] -= ks;
            kk[(4 + d, d)] -= ks;
            cc[(4 + d, 4 + d)] = 2.0 * cb;
        }
        let model = RotorModel {
            nodes_m: vec![0.0, 0.0],
            m: mm,
            k: kk,
            c: cc,
            g: DMatrix::zeros(8, 8),
            bearing_nodes: vec![],
            bearings: vec![],
        };
        let mut s = Solver::new(&model, 1);
        let md = &s.modes_at(0.0, 1).expect("solves")[0];
        assert!(
            (md.damping_ratio - zeta).abs() < 2e-4,
            "c_b {cb}: ζ {}",
            md.damping_ratio
        );
    }
}

#[test]
fn short_bearing_coefficients_match_the_table() {
    // rotor-notes §B2 dimensionless table [der; formulas Friswell et al. 2010, from memory,
    // confirmed there by numerical linearisation]: ε, S_s, a_uu, a_uv, a_vu, a_vv, b_uu, b_uv, b_vv.
    #[rustfmt::skip]
    let table = [
        (0.1, 3.11011, [2.5308, 9.7577, -10.3811, 1.3284], [19.7905, -2.5325, 20.4872]),
        (0.2, 1.44888, [2.4849, 4.5203, -5.7631, 1.4978], [9.5869, -2.4916, 10.9798]),
        (0.3, 0.85507, [2.4126, 2.6246, -4.4825, 1.7949], [6.0612, -2.4270, 8.1530]),
        (0.4, 0.53552, [2.3189, 1.5715, -4.0478, 2.2493], [4.2164, -2.3430, 7.0221]),
        (0.5, 0.33316, [2.2099, 0.8577, -3.9766, 2.9233], [3.0539, -2.2450, 6.6148]),
        (0.6, 0.19644, [2.0917, 0.3071, -4.1377, 3.9512], [2.2389, -2.1380, 6.6507]),
        (0.7, 0.10356, [1.9695, -0.1734, -4.5347, 5.6594], [1.6240, -2.0267, 7.0987]),
        (0.8, 0.04362, [1.8477, -0.6739, -5.3264, 9.0423], [1.1281, -1.9151, 8.1768]),
        (0.9, 0.01041, [1.7294, -1.4213, -7.2637, 19.0955], [0.6869, -1.8059, 10.9978]),
    ];
    for (eps, ss, a, b) in table {
        assert!(
            (short_sommerfeld(eps) - ss).abs() < 1e-5 * ss.max(1.0),
            "ε {eps}"
        );
        let (ka, cb) = short_coefficients(eps);
        let got_a = [ka[0][0], ka[0][1], ka[1][0], ka[1][1]];
        for (g, w) in got_a.iter().zip(a) {
            assert!(
                (g - w).abs() < 1e-4 * w.abs().max(1.0),
                "ε {eps}: a {g} vs {w}"
            );
        }
        let got_b = [cb[0][0], cb[0][1], cb[1][1]];
        for (g, w) in got_b.iter().zip(b) {
            assert!(
                (g - w).abs() < 1e-4 * w.abs().max(1.0),
                "ε {eps}: b {g} vs {w}"
            );
        }
        assert_eq!(cb[0][1], cb[1][0], "no fluid inertia: c_uv = c_vu");
    }
}

fn d9_bearing() -> PlainBearing {
    PlainBearing {
        diameter_m: 0.025,
        length_m: 0.0125,
        clearance_m: 50e-6,
        viscosity_pa_s: 0.03,
        load_n: 50.0,
        two_lobe: None,
    }
}

#[test]
fn dimensional_short_bearing_in_the_load_frame() {
    // rotor-notes §D9 [der]: μ = 0.03 Pa·s, D = 25 mm, L = 12.5 mm, c = 50 µm, W = 50 N,
    // 3000 rpm: S_s = 0.4602, ε = 0.4326, φ = 58.58°, in the (u, v) frame
    // K = [2.285e6, 1.313e6; −3.995e6, 2.440e6] N/m, C = [1.205e4, −7360; −7360, 2.174e4] N·s/m.
    // Ours has x along the load: kxx = k_vv, kxy = −k_vu, kyx = −k_uv, kyy = k_uu.
    let r = d9_bearing()
        .at_speed(3000.0, FilmMethod::Short)
        .expect("solves");
    assert!((r.modified_sommerfeld - 0.4602).abs() < 1e-4);
    assert!((r.eccentricity_ratio - 0.4326).abs() < 1e-4);
    assert!((r.attitude_angle_deg - 58.58).abs() < 0.01);
    let k = r.k_n_per_m;
    let c = r.c_n_s_per_m;
    for (g, w) in [
        (k[0][0], 2.440e6),
        (k[0][1], 3.995e6),
        (k[1][0], -1.313e6),
        (k[1][1], 2.285e6),
        (c[0][0], 2.174e4),
        (c[0][1], 7360.0),
        (c[1][0], 7360.0),
        (c[1][1], 1.205e4),
    ] {
        assert!(rel(g, w) < 1e-3, "{g} vs {w}");
    }
}

#[test]
fn rigid_rotor_on_short_bearings_goes_unstable_at_the_published_threshold() {
    // rotor-notes §D9 [der]: the rotor of 10.194 kg on the two bearings above (5.097 kg each)
    // goes unstable at 11430.6 rpm with whirl ratio 0.5079 (96.76 Hz).
    let model = point_model(
        5.097,
        [[0.0; 2]; 2],
        [[0.0; 2]; 2],
        vec![BearingLaw::Plain(d9_bearing(), FilmMethod::Short)],
    );
    let speeds: Vec<f64> = (0..=20).map(|i| 5000.0 + 500.0 * i as f64).collect();
    let c = campbell(&model, &speeds, 2).expect("campbell");
    let th = c.stability_threshold_rpm.expect("a threshold");
    assert!(rel(th, 11430.6) < 2e-4, "{th}");
    let f = c.threshold_frequency_hz.expect("its frequency");
    assert!((f - 96.76).abs() < 0.05, "{f}");
}

#[test]
fn at_rest_the_rotor_model_reproduces_the_bench_model() {
    // Our own consistency: with no spin and isotropic supports the two-plane model is the planar
    // one twice (each frequency appears as a pair) — `tapgrid model`'s frequencies.
    let shaft = Shaft {
        material: Material::STEEL,
        sections: vec![
            Section {
                length_m: 0.15,
                outer_diameter_m: 0.035,
                inner_diameter_m: 0.0,
                material: None,
            },
            Section {
                length_m: 0.6,
                outer_diameter_m: 0.045,
                inner_diameter_m: 0.01,
                material: None,
            },
            Section {
                length_m: 0.15,
                outer_diameter_m: 0.035,
                inner_diameter_m: 0.0,
                material: None,
            },
        ],
        discs: vec![Disc {
            position_m: 0.45,
            mass_kg: 2.0,
            polar_inertia_kg_m2: 0.004,
            transverse_inertia_kg_m2: 0.002,
        }],
        supports: vec![Support::lateral(0.2, 4e3), Support::lateral(0.7, 4e3)],
    };
    let (_, planar) = shaft
        .modes(BeamTheory::Timoshenko, 6, 40, &[])
        .expect("planar");
    let model = Rotor {
        shaft,
        bearings: vec![],
        unbalances: vec![],
    }
    .assemble(BeamTheory::Timoshenko, 40, &[])
    .expect("assembles");
    let mut s = Solver::new(&model, 12);
    let modes = s.modes_at(0.0, 12).expect("solves");
    for (k, p) in planar.iter().enumerate() {
        for m in &modes[2 * k..2 * k + 2] {
            assert!(
                rel(m.frequency_hz, p.frequency_hz) < 1e-6,
                "{k}: {} vs {}",
                m.frequency_hz,
                p.frequency_hz
            );
        }
    }
}

#[test]
fn bearings_at_a_position_enter_the_model() {
    // A placed bearing with constant coefficients acts like a support of the same stiffness.
    let shaft = Shaft {
        material: Material::STEEL,
        sections: vec![Section {
            length_m: 0.8,
            outer_diameter_m: 0.04,
            inner_diameter_m: 0.0,
            material: None,
        }],
        discs: vec![],
        supports: vec![],
    };
    let with_bearings = Rotor {
        shaft: shaft.clone(),
        bearings: [0.1, 0.7]
            .iter()
            .map(|&x| PlacedBearing {
                position_m: x,
                law: BearingLaw::Constant(Coefficients::isotropic(5e6, 0.0)),
            })
            .collect(),
        unbalances: vec![],
    }
    .assemble(BeamTheory::Timoshenko, 40, &[])
    .expect("assembles");
    let mut supported = shaft;
    supported.supports = vec![Support::lateral(0.1, 5e6), Support::lateral(0.7, 5e6)];
    let (_, planar) = supported
        .modes(BeamTheory::Timoshenko, 3, 40, &[])
        .expect("planar");
    let modes = Solver::new(&with_bearings, 6)
        .modes_at(0.0, 6)
        .expect("solves");
    for (k, p) in planar.iter().enumerate() {
        assert!(rel(modes[2 * k].frequency_hz, p.frequency_hz) < 1e-6);
    }
}

#[test]
fn the_reduced_basis_agrees_with_the_whole_space_on_the_example_rotor() {
    // Our own consistency: the pseudo-modal basis (the default) against the exact change to
    // modal coordinates, on the README's pump rotor with plain bearings and a disc.
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-sessions/rotors/pump-rotor.json");
    let file = tapgrid::rotor::file::read_rotor(&path).expect("example rotor");
    let model = file
        .rotor
        .assemble(BeamTheory::Timoshenko, 40, &[])
        .expect("assembles");
    for rpm in [1000.0, 3000.0, 9000.0] {
        let reduced = Solver::new(&model, 8).modes_at(rpm, 8).expect("reduced");
        let full = Solver::with_basis(&model, usize::MAX)
            .modes_at(rpm, 8)
            .expect("full");
        for (r, f) in reduced.iter().zip(&full) {
            assert!(
                rel(r.frequency_hz, f.frequency_hz) < 1e-4,
                "{rpm}: {} vs {}",
                r.frequency_hz,
                f.frequency_hz
            );
            assert!(
                (r.log_dec - f.log_dec).abs() < 2e-3 * f.log_dec.abs().max(0.1),
                "{rpm}: δ {} vs {}",
                r.log_dec,
                f.log_dec
            );
            assert_eq!(r.whirl, f.whirl);
        }
    }
}

#[test]
fn finite_bearing_matches_raimondi_and_boyd_and_the_notes_solution() {
    use tapgrid::rotor::reynolds::{Bore, Grid, finite_sommerfeld};
    // Raimondi & Boyd (1958), L/D = 1 full bearing, as reprinted in Shigley (from memory, via
    // rotor-notes §B6.3): (ε, S, φ°). Their film starts at the h_max line; our free cavitation
    // boundary gives attitude angles up to ≈ 2° larger at these ε (rotor-notes' own free-boundary
    // solution, 180 × 40: 65.13, 51.98, 36.79, 26.71°).
    for (eps, s_rb, phi_rb, s_free, phi_free) in [
        (0.4, 0.264, 63.10, 0.2604, 65.13),
        (0.6, 0.121, 50.58, 0.1215, 51.98),
        (0.8, 0.0446, 36.24, 0.0448, 36.79),
        (0.9, 0.0188, 26.45, 0.0189, 26.71),
    ] {
        let (s, phi) = finite_sommerfeld(Bore::plain(1.0), eps, Grid::default()).expect("solves");
        assert!(rel(s, s_rb) < 0.02, "ε {eps}: S {s} vs R&B {s_rb}");
        assert!(
            (phi - phi_rb).abs() < 2.5,
            "ε {eps}: φ {phi} vs R&B {phi_rb}"
        );
        assert!(rel(s, s_free) < 0.01, "ε {eps}: S {s} vs {s_free}");
        assert!(
            (phi - phi_free).abs() < 0.3,
            "ε {eps}: φ {phi} vs {phi_free}"
        );
    }
}

#[test]
fn finite_bearing_coefficients_match_the_notes_finite_difference_solution() {
    use tapgrid::rotor::reynolds::{Bore, Grid, finite_at_eccentricity};
    // rotor-notes §B6.4 [der; their own 180 × 40 Reynolds-condition solution, not yet compared
    // with a published table]: L/D, ε, S, φ, (a_uu, a_uv, a_vu, a_vv), (b_uu, b_uv, b_vv) in the
    // (u, v) frame; ours has x = −v, y = u: kxx = a_vv, kxy = −a_vu, kyx = −a_uv, kyy = a_uu.
    #[rustfmt::skip]
    let cases = [
        (1.0, 0.3, 0.3870, 71.44, [2.098, 2.819, -4.015, 1.346], [6.359, -2.135, 7.750]),
        (1.0, 0.5, 0.1792, 58.69, [2.018, 1.117, -3.209, 1.950], [3.467, -2.110, 5.966]),
        (1.0, 0.7, 0.0782, 44.82, [1.936, 0.082, -3.413, 3.431], [2.091, -2.104, 6.170]),
        (0.5, 0.3, 1.2231, 69.23, [2.301, 2.664, -4.296, 1.641], [6.119, -2.319, 8.010]),
        (0.5, 0.5, 0.5109, 55.34, [2.145, 0.953, -3.652, 2.522], [3.216, -2.223, 6.400]),
        (0.5, 0.7, 0.1855, 40.92, [1.952, -0.052, -3.978, 4.569], [1.821, -2.102, 6.787]),
    ];
    for (ld, eps, s, phi, a, b) in cases {
        let f = finite_at_eccentricity(Bore::plain(ld), eps, Grid::default()).expect("solves");
        assert!(
            rel(f.sommerfeld, s) < 2e-3,
            "{ld} {eps}: S {}",
            f.sommerfeld
        );
        assert!(
            (f.attitude_angle_deg - phi).abs() < 0.1,
            "φ {}",
            f.attitude_angle_deg
        );
        let ours = [f.a[1][1], f.a[1][0], f.a[0][1], f.a[0][0]];
        let theirs = [a[0], -a[1], -a[2], a[3]];
        for (o, t) in ours.iter().zip(theirs) {
            assert!(
                (o - t).abs() < 0.01 * t.abs().max(1.0),
                "{ld} {eps}: a {o} vs {t}"
            );
        }
        let ours = [f.b[1][1], f.b[1][0], f.b[0][0]];
        let theirs = [b[0], -b[1], b[2]];
        for (o, t) in ours.iter().zip(theirs) {
            assert!(
                (o - t).abs() < 0.01 * t.abs().max(1.0),
                "{ld} {eps}: b {o} vs {t}"
            );
        }
        // c_xy = c_yx without fluid inertia (rotor-notes §A3) for a frozen cavitation boundary;
        // differences of the full force let the boundary move, which costs a little symmetry.
        assert!(
            rel(f.b[0][1], f.b[1][0]) < 5e-3,
            "{ld} {eps}: c_xy {} c_yx {}",
            f.b[0][1],
            f.b[1][0]
        );
    }
}

#[test]
fn a_short_finite_bearing_approaches_the_closed_form() {
    use tapgrid::rotor::reynolds::{Bore, Grid, finite_at_eccentricity};
    // rotor-notes §B6.2 [der]: at L/D = 0.05, ε = 0.3 the finite-difference solution is within
    // 0.6 % of the short-bearing Sommerfeld number and about 1 % of its direct stiffness.
    let f = finite_at_eccentricity(Bore::plain(0.05), 0.3, Grid::default()).expect("solves");
    let ss = f.sommerfeld * std::f64::consts::PI * 0.05 * 0.05;
    assert!(rel(ss, short_sommerfeld(0.3)) < 0.01, "{ss}");
    let (a, _) = short_coefficients(0.3);
    // kxx = a_vv, kyy = a_uu, kxy = −a_vu (frame in tapgrid::rotor::bearing).
    assert!(rel(f.a[0][0], a[1][1]) < 0.02 && rel(f.a[1][1], a[0][0]) < 0.02);
    assert!(rel(f.a[0][1], -a[1][0]) < 0.02);
}

#[test]
fn a_finite_bearing_in_a_rotor_interpolates_its_table_closely() {
    // Our own consistency: the tabulated film (25 eccentricities, ln S interpolation) against a
    // direct solve at the same speed.
    let b = d9_bearing();
    let law = BearingLaw::Plain(b, FilmMethod::Finite)
        .prepared()
        .expect("table");
    for rpm in [1500.0, 4000.0, 9000.0] {
        let direct = b
            .at_speed(rpm, FilmMethod::Finite)
            .expect("direct")
            .coefficients();
        let table = law.at(rpm).expect("table");
        for i in 0..2 {
            for j in 0..2 {
                let (d, t) = (direct.k_n_per_m[i][j], table.k_n_per_m[i][j]);
                assert!(
                    (d - t).abs() < 0.01 * direct.k_n_per_m[0][0].abs(),
                    "{rpm}: k{i}{j} {t} vs {d}"
                );
            }
        }
    }
}

/// Lund's rigid-rotor threshold from dimensionless coefficients (rotor-notes §B3): K_eq, the
/// whirl ratio γ and m c ω_th²/W = K_eq/γ². The combinations are the same in any right-handed
/// frame, ours included.
fn lund_threshold(a: [[f64; 2]; 2], b: [[f64; 2]; 2]) -> (f64, f64) {
    let keq = (a[0][0] * b[1][1] + a[1][1] * b[0][0] - a[0][1] * b[1][0] - a[1][0] * b[0][1])
        / (b[0][0] + b[1][1]);
    let g2 = ((keq - a[0][0]) * (keq - a[1][1]) - a[0][1] * a[1][0])
        / (b[0][0] * b[1][1] - b[0][1] * b[1][0]);
    (g2.sqrt(), keq / g2)
}

#[test]
fn two_lobe_bearing_matches_the_notes_solution_and_is_more_stable_than_a_plain_one() {
    use tapgrid::rotor::reynolds::{Bore, Grid, finite_at_eccentricity};
    // rotor-notes §B6.5 [der, unverified there]: two-lobe bore, m = 0.5, L/D = 0.5, 20° grooves,
    // c_l basis: ε = 0.2: S = 0.6871, φ = 85.18°, γ = 0.443, m c ω²/W = 16.1; ε = 0.4: S =
    // 0.1677, φ = 73.35°, γ = 0.098, 219. No published table was seen. Our solution is
    // grid-converged (S changes by 0.1 % from 180 to 720 nodes around) and sensitive to where the
    // groove edge falls (S = 0.655 with 10° grooves, 0.704 with 20°, 0.723 with 24°, measured):
    // the notes' figures sit within 3 % of ours, as from a groove a node or two narrower.
    let bore = Bore {
        l_over_d: 0.5,
        preload: 0.5,
        groove_rad: 20f64.to_radians(),
    };
    for (eps, s, phi, gamma, thr) in [
        (0.2, 0.6871, 85.18, 0.443, 16.1),
        (0.4, 0.1677, 73.35, 0.098, 219.0),
    ] {
        let f = finite_at_eccentricity(bore, eps, Grid::default()).expect("solves");
        let (g, t) = lund_threshold(f.a, f.b);
        assert!(rel(f.sommerfeld, s) < 0.03, "ε {eps}: S {}", f.sommerfeld);
        assert!(
            (f.attitude_angle_deg - phi).abs() < 1.2,
            "φ {}",
            f.attitude_angle_deg
        );
        assert!((g - gamma).abs() < 0.01, "ε {eps}: γ {g}");
        assert!(rel(t, thr) < 0.08, "ε {eps}: m c ω²/W {t}");
    }
    // The plain bearing of the same L/D at ε = 0.5 (rotor-notes §B6.4: γ = 0.5004, 6.577).
    let plain = finite_at_eccentricity(Bore::plain(0.5), 0.5, Grid::default()).expect("solves");
    let (g, t) = lund_threshold(plain.a, plain.b);
    assert!((g - 0.5004).abs() < 0.01 && rel(t, 6.577) < 0.02, "{g} {t}");
}

/// A rigid rotor as one node: mass `m` on translations, transverse inertia `it` and polar `ip`
/// on the rotations, bearings of `k` each at ±`a` (2k in translation, 2ka² in tilt).
fn rigid_rotor(m: f64, it: f64, ip: f64, k: f64, a: f64) -> RotorModel {
    let mut model = point_model(m, [[2.0 * k, 0.0], [0.0, 2.0 * k]], [[0.0; 2]; 2], vec![]);
    for d in 2..4 {
        model.m[(d, d)] = it;
        model.k[(d, d)] = 2.0 * k * a * a;
    }
    model.g[(2, 3)] = ip;
    model.g[(3, 2)] = -ip;
    model
}

#[test]
fn rigid_rotor_conical_modes_split_with_speed() {
    // rotor-notes §D5 [der]: I_t ω² − I_p Ω ω − 2ka² = 0; bearings k = 1e6 N/m at ±0.15 m,
    // m = 20 kg (cylindrical √(2k/m) = 316.2278 rad/s). I_p = 0.3, I_t = 0.2: conical 474.342
    // rad/s at rest; 979.669 F / 229.669 B at Ω = 500 rad/s; 1637.412 / 137.412 at 1000 rad/s;
    // no forward critical, backward critical 300.000 rad/s. I_t = 0.6: forward critical 387.298,
    // backward 223.607 rad/s.
    let w = |hz: f64| hz * 2.0 * std::f64::consts::PI;
    let model = rigid_rotor(20.0, 0.2, 0.3, 1e6, 0.15);
    let mut s = Solver::new(&model, 4);
    let rest = s.modes_at(0.0, 4).expect("solves");
    assert!(rel(w(rest[0].frequency_hz), 316.2278) < 1e-6);
    assert!(rel(w(rest[2].frequency_hz), 474.342) < 1e-6);
    for (omega, fwd, bwd) in [(500.0, 979.669, 229.669), (1000.0, 1637.412, 137.412)] {
        let modes = s.modes_at(omega * RPM, 4).expect("solves");
        let conical: Vec<_> = modes
            .iter()
            .filter(|m| rel(w(m.frequency_hz), 316.2278) > 1e-3)
            .collect();
        let f = conical
            .iter()
            .find(|m| m.whirl == Whirl::Forward)
            .expect("F");
        let b = conical
            .iter()
            .find(|m| m.whirl == Whirl::Backward)
            .expect("B");
        assert!(
            rel(w(f.frequency_hz), fwd) < 5e-6,
            "{omega}: F {}",
            w(f.frequency_hz)
        );
        assert!(
            rel(w(b.frequency_hz), bwd) < 5e-6,
            "{omega}: B {}",
            w(b.frequency_hz)
        );
    }
    let speeds: Vec<f64> = (0..=60).map(|i| 25.0 * i as f64 * RPM).collect();
    let conical_crit = |model: &RotorModel| {
        campbell(model, &speeds, 4)
            .expect("campbell")
            .critical_speeds
            .into_iter()
            .filter(|c| c.order == 1 && rel(c.speed_rpm / RPM, 316.2278) > 1e-3)
            .map(|c| (c.whirl, c.speed_rpm / RPM))
            .collect::<Vec<_>>()
    };
    let disc = conical_crit(&model);
    assert_eq!(disc.len(), 1, "{disc:?}");
    assert_eq!(disc[0].0, Whirl::Backward);
    assert!(rel(disc[0].1, 300.0) < 5e-6, "{disc:?}");
    let long = conical_crit(&rigid_rotor(20.0, 0.6, 0.3, 1e6, 0.15));
    let f = long
        .iter()
        .find(|c| c.0 == Whirl::Forward)
        .expect("forward");
    let b = long
        .iter()
        .find(|c| c.0 == Whirl::Backward)
        .expect("backward");
    assert!(
        rel(f.1, 387.298) < 5e-6 && rel(b.1, 223.607) < 5e-6,
        "{long:?}"
    );
}

#[test]
fn rigid_rotor_on_short_bearings_thresholds_by_eccentricity() {
    // rotor-notes §D7 [der]: (ε: K_eq, γ, m c ω_th²/W) from Lund's argument on the short-bearing
    // coefficients; our closed-form coefficients through the same formulas.
    for (eps, keq, gamma, thr) in [
        (0.1, 1.9008, 0.50294, 7.5146),
        (0.3, 1.8319, 0.51942, 6.7901),
        (0.5, 1.7111, 0.51464, 6.4604),
        (0.6, 1.6388, 0.47396, 7.2953),
        (0.7, 1.5626, 0.34457, 13.161),
    ] {
        let (a, b) = short_coefficients(eps);
        let k = (a[0][0] * b[1][1] + a[1][1] * b[0][0] - a[0][1] * b[1][0] - a[1][0] * b[0][1])
            / (b[0][0] + b[1][1]);
        let (g, t) = lund_threshold(a, b);
        assert!(
            (k - keq).abs() < 1e-4 && (g - gamma).abs() < 1e-4,
            "ε {eps}: {k} {g}"
        );
        assert!(rel(t, thr) < 1e-4, "ε {eps}: {t}");
    }
}

#[test]
fn flexible_jeffcott_rotor_on_short_bearings_threshold_falls_with_flexibility() {
    // rotor-notes §D8 [der]: ε = 0.3, m c ω_th²/W = 6.79012, 5.73881, 4.21578, 2.39769 for shaft
    // stiffness κ = kc/W = ∞, 10, 3, 1 (the notes' eigenvalue solution agrees with the closed
    // form to 5 digits). Here by our solver: W = 1 N, c = 1 m, m = 1 kg on a shaft spring k = κ
    // to a journal of 1e-4 kg on a bearing held at ε = 0.3: K = a, C = b/ω (a table fine enough
    // in speed that its interpolation is exact to 1e-6).
    let (a, b) = short_coefficients(0.3);
    // (u, v) → (x, y) = (−v, u).
    let to_xy = |m: [[f64; 2]; 2]| [[m[1][1], -m[1][0]], [-m[0][1], m[0][0]]];
    let (a, b) = (to_xy(a), to_xy(b));
    for (kappa, want) in [(10.0, 5.73881), (3.0, 4.21578), (1.0, 2.39769)] {
        let w_th = f64::sqrt(want);
        let speeds: Vec<f64> = (0..=400)
            .map(|i| (0.8 + 0.4 * i as f64 / 400.0) * w_th * RPM)
            .collect();
        let table = speeds
            .iter()
            .map(|&n| {
                let w = n / RPM;
                (
                    n,
                    Coefficients {
                        k_n_per_m: a,
                        c_n_s_per_m: [[b[0][0] / w, b[0][1] / w], [b[1][0] / w, b[1][1] / w]],
                    },
                )
            })
            .collect();
        let mut mm = DMatrix::zeros(8, 8);
        let mut kk = DMatrix::zeros(8, 8);
        for (node, mass) in [(0, 1.0), (1, 1e-4)] {
            let base = 4 * node;
            mm[(base, base)] = mass;
            mm[(base + 1, base + 1)] = mass;
            mm[(base + 2, base + 2)] = 1e-4;
            mm[(base + 3, base + 3)] = 1e-4;
            kk[(base + 2, base + 2)] = 1e3;
            kk[(base + 3, base + 3)] = 1e3;
        }
        for d in 0..2 {
            kk[(d, d)] += kappa;
            kk[(4 + d, 4 + d)] += kappa;
            kk[(d, 4 + d)] -= kappa;
            kk[(4 + d, d)] -= kappa;
        }
        let model = RotorModel {
            nodes_m: vec![0.0, 0.0],
            m: mm,
            k: kk,
            c: DMatrix::zeros(8, 8),
            g: DMatrix::zeros(8, 8),
            bearing_nodes: vec![1],
            bearings: vec![BearingLaw::Table(table)],
        };
        let c = campbell(&model, &speeds, 2).expect("campbell");
        let th = c.stability_threshold_rpm.expect("a threshold") / RPM;
        assert!(rel(th * th, want) < 2e-4, "κ {kappa}: {}", th * th);
    }
}
