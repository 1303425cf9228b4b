//! Criterion benchmarks of the inversion (no plotting).
//!
//! Spectrum: 81 points, 10 per decade from 1e-2 to 1e6 Hz, ZARC + Voigt element
//! with 0.5 % noise (seed 1). The `plan` group measures the per-response cost
//! through a prepared `SpectrumPlan` (built once) and the cost of building
//! one. Results: docs/performance.md.

use criterion::{Criterion, criterion_group, criterion_main};
use std::hint::black_box;
use taumap::io::Spectrum;
use taumap::kernel::{Basis, BasisKind, ImpedanceKernel};
use taumap::lambda::LambdaRule;
use taumap::pipeline::spectrum::problem;
use taumap::pipeline::{DrtOptions, InvertParams, LambdaChoice, SpectrumPlan, invert};
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
    // The default refines by the adaptive penalty; this is the lambda rule
    // with the global penalty alone (`--penalty global`).
    let global = with_drt(DrtOptions {
        adaptive: None,
        ..DrtOptions::default()
    });
    c.bench_function("invert/auto_global", |b| {
        b.iter(|| invert(black_box(&s), black_box(&global)).expect("inverts"))
    });
    let bands = with_drt(DrtOptions {
        bands: Some(taumap::pipeline::bands::BandOptions::default()),
        ..DrtOptions::default()
    });
    c.bench_function("invert/auto_with_bands", |b| {
        b.iter(|| invert(black_box(&s), black_box(&bands)).expect("inverts"))
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
    let kk_opts = taumap::kk::KkOptions::default();
    c.bench_function("kk/linear_test_81_points", |b| {
        b.iter(|| taumap::kk::kk_test(black_box(&s), black_box(&kk_opts)).expect("tests"))
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

/// Per-response cost through a prepared plan: the plan is built once, outside
/// the timed closure, and each iteration inverts the same 81-point spectrum.
fn plan_benches(c: &mut Criterion) {
    let s = spectrum();
    let auto = InvertParams::default();
    let fixed = with_drt(DrtOptions {
        lambda: LambdaChoice::Fixed(1e-3),
        ..DrtOptions::default()
    });
    let mut group = c.benchmark_group("plan");
    let plan_fixed = SpectrumPlan::new(&s.frequency_hz, &fixed).expect("plan builds");
    group.bench_function("invert_fixed_lambda", |b| {
        b.iter(|| {
            plan_fixed
                .invert(black_box(&s.z_re_ohm), black_box(&s.z_im_ohm), None)
                .expect("inverts")
        })
    });
    let plan_auto = SpectrumPlan::new(&s.frequency_hz, &auto).expect("plan builds");
    group.bench_function("invert_auto_default_rule", |b| {
        b.iter(|| {
            plan_auto
                .invert(black_box(&s.z_re_ohm), black_box(&s.z_im_ohm), None)
                .expect("inverts")
        })
    });
    // Unit weighting: the design matrix and its cross product are the
    // plan's, the same for every response.
    let unit_fixed = InvertParams {
        weighting: taumap::pipeline::Weighting::Unit,
        ..fixed.clone()
    };
    let plan_unit = SpectrumPlan::new(&s.frequency_hz, &unit_fixed).expect("plan builds");
    group.bench_function("invert_fixed_lambda_unit_weighting", |b| {
        b.iter(|| {
            plan_unit
                .invert(black_box(&s.z_re_ohm), black_box(&s.z_im_ohm), None)
                .expect("inverts")
        })
    });
    group.bench_function("build", |b| {
        b.iter(|| {
            SpectrumPlan::new(black_box(&s.frequency_hz), black_box(&auto)).expect("plan builds")
        })
    });
    group.finish();
}

criterion_group! {
    name = invert_benches;
    // Criterion's own HTML plots are not needed (and need system fonts).
    config = Criterion::default().without_plots();
    targets = benches, plan_benches
}
criterion_main!(invert_benches);
