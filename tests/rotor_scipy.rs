//! Damped eigenvalues of a small spinning rotor against `scipy.linalg.eig` of the same matrices
//! (generalized form A z = λ B z, A = [[0, I], [−K, −C]], B = [[I, 0], [0, M]]; rotor-notes §A4).
//!
//! The matrices are written by the ignored test below (`cargo test --test rotor_scipy -- \
//! --ignored`), SciPy's eigenvalues added by `scripts/make_rotor_scipy_fixture.py`; the checked
//! test first confirms that today's assembly still gives the fixture's matrices. Agreement to
//! 1e-7 of |λ| (measured: 1.5e-8 at worst, on the most heavily damped mode; both solvers are
//! backward stable, so the gap is the eigenvalue's conditioning).

#![allow(clippy::unwrap_used, clippy::expect_used)]

use serde_json::{Value, json};
use tapgrid::model::beam::{BeamTheory, Disc, Material, Section, Shaft, Support};
use tapgrid::rotor::bearing::{BearingLaw, Coefficients};
use tapgrid::rotor::campbell::Solver;
use tapgrid::rotor::model::{PlacedBearing, Rotor, RotorModel};

const FIXTURE: &str = concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/tests/fixtures/scipy_rotor_eig.json"
);
const SPEED_RPM: f64 = 6000.0;

fn small_rotor() -> RotorModel {
    let section = |l: f64, d: f64| Section {
        length_m: l,
        outer_diameter_m: d,
        inner_diameter_m: 0.0,
        material: None,
    };
    let bearing = |x: f64| PlacedBearing {
        position_m: x,
        law: BearingLaw::Constant(Coefficients {
            k_n_per_m: [[2.0e7, 6.0e6], [-9.0e6, 1.5e7]],
            c_n_s_per_m: [[3.0e3, -5.0e2], [-5.0e2, 4.0e3]],
        }),
    };
    Rotor {
        shaft: Shaft {
            material: Material::STEEL,
            sections: vec![section(0.1, 0.03), section(0.3, 0.04), section(0.1, 0.03)],
            discs: vec![Disc {
                position_m: 0.25,
                mass_kg: 3.0,
                polar_inertia_kg_m2: 0.012,
                transverse_inertia_kg_m2: 0.007,
            }],
            supports: vec![Support::lateral(0.5, 1e5)],
        },
        bearings: vec![bearing(0.05), bearing(0.45)],
        unbalances: vec![],
    }
    .assemble(BeamTheory::Timoshenko, 4, &[])
    .unwrap()
}

fn rows(m: &nalgebra::DMatrix<f64>) -> Value {
    json!(
        (0..m.nrows())
            .map(|i| (0..m.ncols()).map(|j| m[(i, j)]).collect::<Vec<_>>())
            .collect::<Vec<_>>()
    )
}

#[test]
#[ignore = "writes the fixture's matrices; run by hand, then scripts/make_rotor_scipy_fixture.py"]
fn write_matrices() {
    let model = small_rotor();
    let (k, c) = model.at_speed(SPEED_RPM).unwrap();
    let v = json!({"speed_rpm": SPEED_RPM, "m": rows(&model.m), "k": rows(&k), "c": rows(&c)});
    std::fs::write(FIXTURE, serde_json::to_string(&v).unwrap()).unwrap();
}

#[test]
fn damped_eigenvalues_match_scipy() {
    let v: Value = serde_json::from_str(&std::fs::read_to_string(FIXTURE).unwrap()).unwrap();
    assert!(v["scipy_version"].as_str().is_some(), "run the script");
    let model = small_rotor();
    let (k, c) = model.at_speed(SPEED_RPM).unwrap();
    let same = |name: &str, m: &nalgebra::DMatrix<f64>| {
        let f = v[name].as_array().unwrap();
        for (i, row) in f.iter().enumerate() {
            for (j, x) in row.as_array().unwrap().iter().enumerate() {
                let x = x.as_f64().unwrap();
                assert!(
                    (m[(i, j)] - x).abs() <= 1e-12 * x.abs().max(1.0),
                    "{name}[{i},{j}]"
                );
            }
        }
    };
    same("m", &model.m);
    same("k", &k);
    same("c", &c);
    let want: Vec<(f64, f64)> = v["eigenvalues"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| (p[0].as_f64().unwrap(), p[1].as_f64().unwrap()))
        .collect();
    let got = Solver::new(&model, 8).modes_at(SPEED_RPM, 8).unwrap();
    assert_eq!(got.len(), 8);
    for (g, (re, im)) in got.iter().zip(&want) {
        let d = ((g.eigenvalue.re - re).powi(2) + (g.eigenvalue.im - im).powi(2)).sqrt();
        assert!(
            d <= 1e-7 * (re * re + im * im).sqrt(),
            "{} vs {re}+{im}i",
            g.eigenvalue
        );
    }
}
