//! Criterion benchmarks of the inversion (no plotting).
//!
//! Spectrum: 81 points, 10 per decade from 1e-2 to 1e6 Hz, ZARC + Voigt element
//! with 0.5 % noise (seed 1). Results: docs/performance.md.

use criterion::{Criterion, criterion_group, criterion_main};
use std::hint::black_box;
use taumap::invert::{DrtOptions, InvertParams, LambdaChoice, invert, problem};
use taumap::io::Spectrum;
use taumap::kernel::{Basis, BasisKind, ImpedanceKernel};
use taumap::lambda::LambdaRule;
use taumap::synth::{cells, reference_spectrum};

fn spectrum() -> Spectrum {
    let s =
        reference_spectrum(&cells::zarc_plus_voigt(), 0.005, 1).expect("valid synthetic spectrum");
    assert_eq!(s.len(), 81);
    s
}

fn with_drt(drt: DrtOptions) -> InvertParams {
    InvertParams {
        drt,
        ..InvertParams::default()
    }
}

fn benches(c: &mut Criterion) {
    let s = spectrum();
    let auto = InvertParams::default();
    c.bench_function("invert/auto_default_rule", |b| {
        b.iter(|| invert(black_box(&s), black_box(&auto)).expect("inverts"))
    });
    let all = with_drt(DrtOptions {
        all_curves: true,
        ..DrtOptions::default()
    });
    c.bench_function("invert/auto_all_rule_curves", |b| {
        b.iter(|| invert(black_box(&s), black_box(&all)).expect("inverts"))
    });
    let gcv = with_drt(DrtOptions {
        lambda: LambdaChoice::Rule(LambdaRule::Gcv),
        ..DrtOptions::default()
    });
    c.bench_function("invert/auto_gcv", |b| {
        b.iter(|| invert(black_box(&s), black_box(&gcv)).expect("inverts"))
    });
    let fixed = with_drt(DrtOptions {
        lambda: LambdaChoice::Fixed(1e-3),
        ..DrtOptions::default()
    });
    c.bench_function("invert/fixed_lambda", |b| {
        b.iter(|| invert(black_box(&s), black_box(&fixed)).expect("inverts"))
    });
    let t = problem(&s, &fixed).expect("problem builds");
    c.bench_function("solve/nnls_one_lambda", |b| {
        b.iter(|| t.solve(black_box(1e-3), &[]))
    });
    let grid = taumap::grid::TauGrid::for_band(1e-2, 1e6, 10.0, 1.0).expect("grid");
    let basis = Basis::new(BasisKind::Gaussian, &grid);
    let omega: Vec<f64> = s
        .frequency_hz
        .iter()
        .map(|f| 2.0 * std::f64::consts::PI * f)
        .collect();
    c.bench_function("kernel/gaussian_81x101", |b| {
        b.iter(|| ImpedanceKernel::new(black_box(&basis), black_box(&omega)))
    });
}

criterion_group! {
    name = invert_benches;
    // Criterion's own HTML plots are not needed (and need system fonts).
    config = Criterion::default().without_plots();
    targets = benches
}
criterion_main!(invert_benches);
