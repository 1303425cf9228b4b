//! The native active-set solver and OSQP agree on the test spectra and transients
//! (independent QP backend; needs `--features osqp`).
#![cfg(feature = "osqp")]

use taumap::pipeline::binning::{BinOptions, BinnedTransient};
use taumap::pipeline::spectrum::problem;
use taumap::pipeline::transient::transient_problem;
use taumap::pipeline::{InvertParams, StepKind, TransientParams};
use taumap::solve::Tikhonov;
use taumap::solve::osqp::{OsqpOptions, solve_nonneg_qp};
use taumap::synth::{Element, Series, add_white_noise, cells, log_times, reference_spectrum};

fn test_cells() -> Vec<Series> {
    let mut inductive = cells::zarc_plus_voigt();
    inductive.0.push(Element::Inductor { l_h: 1e-6 });
    vec![cells::voigt(), cells::zarc(), inductive]
}

/// The squared Euclidean norm of `v`.
fn norm_sq(v: &[f64]) -> f64 {
    v.iter().map(|x| x * x).sum()
}

/// Solves `t` at two lambdas with both solvers and compares objective, fit
/// and total; `label` names the case in messages.
fn check_agreement(t: &Tikhonov, label: &str) {
    for lambda in [1e-4, 1e-2] {
        let native = t.solve(lambda, &[]);
        // 1/2 x'Px + q'x with P = 2(A'A + lambda M + prior), q = -2 A'b
        // equals the full objective minus the constant b'b.
        let p_row: Vec<f64> = t
            .normal_equations(lambda)
            .to_row_major()
            .iter()
            .map(|v| v * 2.0)
            .collect();
        let q: Vec<f64> = t.normal_rhs().iter().map(|v| -2.0 * v).collect();
        let btb = norm_sq(t.rhs());
        let o = solve_nonneg_qp(&p_row, &q, &OsqpOptions::default()).unwrap();
        let obj_native = t.objective(lambda, &native.x);
        let obj_osqp = t.objective(lambda, &o.x);
        assert!(
            (o.objective + btb - obj_osqp).abs() < 1e-9 * (obj_osqp + btb),
            "OSQP's own objective matches"
        );
        let rel_obj = (obj_osqp - obj_native).abs() / obj_native;
        let fit_n = t.predict(&native.x);
        let fit_o = t.predict(&o.x);
        let diff: Vec<f64> = fit_n.iter().zip(&fit_o).map(|(u, v)| u - v).collect();
        let rel_fit = norm_sq(&diff).sqrt() / norm_sq(&fit_n).sqrt();
        let sum = |x: &[f64]| x.iter().sum::<f64>();
        let rel_sum = (sum(&native.x) - sum(&o.x)).abs() / sum(&native.x);
        println!(
            "{label} lambda {lambda:e}: objective {rel_obj:.1e}, fit {rel_fit:.1e}, total {rel_sum:.1e}, osqp {} in {} iterations",
            o.status, o.iterations
        );
        // Relative to the objective, or to the data norm b'b where the fit is
        // so close that OSQP's absolute tolerance dominates.
        assert!(
            rel_obj < 1e-6 || (obj_osqp - obj_native).abs() < 1e-9 * btb,
            "{label} lambda {lambda}: objective {obj_native} vs {obj_osqp}"
        );
        assert!(
            obj_native <= obj_osqp * (1.0 + 1e-7),
            "{label}: native {obj_native} vs OSQP {obj_osqp}"
        );
        // The coefficients themselves are determined only up to the flat
        // directions of an ill-posed problem, where ADMM stops early; the
        // fitted data and the total are well determined.
        assert!(
            rel_fit < 1e-5,
            "{label} lambda {lambda}: fit differs by {rel_fit}"
        );
        assert!(
            rel_sum < 1e-4,
            "{label} lambda {lambda}: total differs by {rel_sum}"
        );
    }
}

#[test]
fn native_and_osqp_agree_on_spectra() {
    for (k, cell) in test_cells().iter().enumerate() {
        let s = reference_spectrum(cell, 0.005, 77 + k as u64).unwrap();
        let t = problem(&s, &InvertParams::default()).unwrap();
        check_agreement(&t, &format!("spectrum {k}"));
    }
}

/// The three kinds of step on the transient kernels: a current step and a
/// relaxation of 5 ohm + ZARC + Voigt, and a series R-C under a voltage step.
#[test]
fn native_and_osqp_agree_on_transients() {
    let cell = cells::zarc_plus_voigt();
    let t = log_times(1e-6, 1.0, 60.0);
    let mut step: Vec<f64> = t.iter().map(|&t| cell.current_step_ohm(t)).collect();
    add_white_noise(&mut step, 0.02, 5);
    let mut relax: Vec<f64> = t.iter().map(|&t| 1.0 + cell.relaxation_ohm(t)).collect();
    add_white_noise(&mut relax, 0.02, 6);
    let mut rc: Vec<f64> = t.iter().map(|&t| 0.02 * (-t / 1e-3).exp()).collect();
    add_white_noise(&mut rc, 2e-5, 7);
    for (label, values, kind) in [
        (
            "current step",
            step,
            StepKind::CurrentStep { current_a: 1.0 },
        ),
        ("relaxation", relax, StepKind::Relaxation { current_a: 1.0 }),
        ("voltage step", rc, StepKind::VoltageStep { voltage_v: 1.0 }),
    ] {
        let rec = BinnedTransient::from_samples(&t, &values, &BinOptions::default()).unwrap();
        let problem = transient_problem(&rec, &TransientParams::new(kind)).unwrap();
        check_agreement(&problem, label);
    }
}
