//! The native active-set solver and OSQP agree on the test spectra
//! (independent QP backend; needs `--features osqp`).
#![cfg(feature = "osqp")]

use nalgebra::DVector;
use taumap::invert::{InvertParams, problem};
use taumap::osqp_backend::{OsqpOptions, solve_nonneg_qp};
use taumap::synth::{Element, Series, cells, reference_spectrum};

fn test_cells() -> Vec<Series> {
    let mut inductive = cells::zarc_plus_voigt();
    inductive.0.push(Element::Inductor { l_h: 1e-6 });
    vec![cells::voigt(), cells::zarc(), inductive]
}

#[test]
fn native_and_osqp_agree() {
    for (k, cell) in test_cells().iter().enumerate() {
        let s = reference_spectrum(cell, 0.005, 77 + k as u64).unwrap();
        let t = problem(&s, &InvertParams::default()).unwrap();
        for lambda in [1e-4, 1e-2] {
            let native = t.solve(lambda, &[]);
            // 1/2 x'Px + q'x with P = 2(A'A + lambda M + prior), q = -2 A'b
            // equals the full objective minus the constant b'b.
            let a = t.design();
            let mut p = a.transpose() * a + t.penalty() * lambda;
            if let Some(prior) = t.prior() {
                p += prior;
            }
            let p = p * 2.0;
            let q: DVector<f64> = -(a.transpose() * t.rhs()) * 2.0;
            let n = p.nrows();
            let p_row: Vec<f64> = (0..n * n).map(|i| p[(i / n, i % n)]).collect();
            let o = solve_nonneg_qp(&p_row, q.as_slice(), &OsqpOptions::default()).unwrap();
            let obj_native = t.objective(lambda, &native.x);
            let obj_osqp = t.objective(lambda, &o.x);
            assert!(
                (o.objective + t.rhs().norm_squared() - obj_osqp).abs() < 1e-9 * obj_osqp,
                "OSQP's own objective matches"
            );
            let rel_obj = (obj_osqp - obj_native).abs() / obj_native;
            assert!(
                rel_obj < 1e-6,
                "cell {k} lambda {lambda}: objective {obj_native} vs {obj_osqp}"
            );
            assert!(
                obj_native <= obj_osqp * (1.0 + 1e-7),
                "native {obj_native} vs OSQP {obj_osqp}"
            );
            // The coefficients themselves are determined only up to the flat
            // directions of an ill-posed problem, where ADMM stops early; the
            // fitted spectrum and the total resistance are well determined.
            let fit_n = DVector::from_vec(t.predict(&native.x));
            let fit_o = DVector::from_vec(t.predict(&o.x));
            let rel_fit = (&fit_n - &fit_o).norm() / fit_n.norm();
            assert!(
                rel_fit < 1e-5,
                "cell {k} lambda {lambda}: fit differs by {rel_fit}"
            );
            let sum = |x: &[f64]| x.iter().sum::<f64>();
            let rel_sum = (sum(&native.x) - sum(&o.x)).abs() / sum(&native.x);
            assert!(
                rel_sum < 1e-4,
                "cell {k} lambda {lambda}: total differs by {rel_sum}"
            );
            println!(
                "cell {k} lambda {lambda:e}: objective {rel_obj:.1e}, fit {rel_fit:.1e}, total {rel_sum:.1e}, osqp {} in {} iterations",
                o.status, o.iterations
            );
        }
    }
}
