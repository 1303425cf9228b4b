//! The native active-set solver and OSQP agree on the test spectra
//! (independent QP backend; needs `--features osqp`).
#![cfg(feature = "osqp")]

use nalgebra::DVector;
use taumap::invert::{InvertParams, problem};
use taumap::io::Spectrum;
use taumap::osqp_backend::{OsqpOptions, solve_nonneg_qp};
use taumap::synth::{Element, Series, add_noise, log_frequencies};

fn cells() -> Vec<Series> {
    use Element::*;
    vec![
        Series(vec![Resistor { r_ohm: 10.0 }, Voigt { r_ohm: 50.0, tau_s: 1e-3 }]),
        Series(vec![Resistor { r_ohm: 10.0 }, Zarc { r_ohm: 50.0, tau_s: 1e-3, phi: 0.8 }]),
        Series(vec![
            Resistor { r_ohm: 5.0 },
            Zarc { r_ohm: 20.0, tau_s: 1e-4, phi: 0.9 },
            Voigt { r_ohm: 30.0, tau_s: 1e-3 },
            Inductor { l_h: 1e-6 },
        ]),
    ]
}

#[test]
fn native_and_osqp_agree() {
    for (k, cell) in cells().iter().enumerate() {
        let f = log_frequencies(1e-2, 1e6, 10.0);
        let (mut re, mut im) = cell.sample(&f);
        add_noise(&mut re, &mut im, 0.005, 77 + k as u64);
        let s = Spectrum::new(f, re, im).unwrap();
        let t = problem(&s, &InvertParams::default()).unwrap();
        for lambda in [1e-4, 1e-2] {
            let native = t.solve(lambda, &[]);
            // 1/2 x'Px + q'x with P = 2(A'A + lambda M), q = -2 A'b equals the
            // Tikhonov objective minus the constant b'b.
            let a = t.design();
            let p = (a.transpose() * a + t.penalty() * lambda) * 2.0;
            let q: DVector<f64> = -(a.transpose() * t.rhs()) * 2.0;
            let n = p.nrows();
            let p_row: Vec<f64> = (0..n * n).map(|i| p[(i / n, i % n)]).collect();
            let o = solve_nonneg_qp(&p_row, q.as_slice(), &OsqpOptions::default()).unwrap();
            let obj_native = native.residual_sq + lambda * native.penalty_sq;
            let obj_osqp = o.objective + t.rhs().norm_squared();
            let rel_obj = (obj_osqp - obj_native).abs() / obj_native;
            assert!(rel_obj < 1e-6, "cell {k} lambda {lambda}: objective {obj_native} vs {obj_osqp}");
            assert!(obj_native <= obj_osqp * (1.0 + 1e-9), "native is the better minimiser");
            let xn = DVector::from_column_slice(&native.x);
            let xo = DVector::from_column_slice(&o.x);
            let rel_x = (&xn - &xo).norm() / xn.norm();
            assert!(rel_x < 1e-4, "cell {k} lambda {lambda}: solution differs by {rel_x}");
        }
    }
}
