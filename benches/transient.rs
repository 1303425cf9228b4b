//! Criterion benchmarks of step-transient inversion (no plotting).
//!
//! Record: a current step of 1 A into 5 ohm + ZARC(20 ohm, 0.1 ms, 0.9) +
//! Voigt(30 ohm, 1 ms) (synth::cells::zarc_plus_voigt), sampled at 100 kHz
//! for 1 s (10^5 samples), 10 mV white noise (seed 1). Results:
//! docs/performance.md.

use criterion::{Criterion, criterion_group, criterion_main};
use std::fmt::Write as _;
use std::hint::black_box;
use std::path::Path;
use taumap::io::transient::{Quantity, parse_transient};
use taumap::kernel::{Basis, BasisKind, StepShape, step_kernel};
use taumap::pipeline::binning::{BinOptions, BinnedTransient};
use taumap::pipeline::{StepKind, TransientParams, invert_transient};
use taumap::synth::{add_white_noise, cells};

fn record() -> (Vec<f64>, Vec<f64>) {
    let cell = cells::zarc_plus_voigt();
    let t: Vec<f64> = (1..=100_000).map(|k| k as f64 * 1e-5).collect();
    let mut v: Vec<f64> = t.iter().map(|&t| cell.current_step_ohm(t)).collect();
    add_white_noise(&mut v, 0.01, 1);
    (t, v)
}

fn benches(c: &mut Criterion) {
    let (t, v) = record();
    let step = TransientParams::new(StepKind::CurrentStep { current_a: 1.0 });
    c.bench_function("transient/bin_and_invert_1e5_samples_auto", |b| {
        b.iter(|| {
            let rec =
                BinnedTransient::from_samples(black_box(&t), black_box(&v), &BinOptions::default())
                    .expect("bins");
            invert_transient(&rec, &step).expect("inverts")
        })
    });
    let rec = BinnedTransient::from_samples(&t, &v, &BinOptions::default()).expect("bins");
    c.bench_function("transient/invert_binned_auto", |b| {
        b.iter(|| invert_transient(black_box(&rec), &step).expect("inverts"))
    });
    let plan = taumap::pipeline::TransientPlan::new(&rec, &step).expect("plan builds");
    c.bench_function("transient/plan_invert_auto", |b| {
        b.iter(|| plan.invert(black_box(&rec), None).expect("inverts"))
    });
    c.bench_function("transient/bin_1e5_samples", |b| {
        b.iter(|| {
            BinnedTransient::from_samples(black_box(&t), black_box(&v), &BinOptions::default())
        })
    });
    let mut text = String::from("time_s,voltage_v\n");
    for (t, v) in t.iter().zip(&v) {
        let _ = writeln!(text, "{t:.6e},{v:.9e}");
    }
    c.bench_function("transient/parse_1e5_line_csv", |b| {
        b.iter(|| {
            parse_transient(
                black_box(text.as_bytes()),
                Path::new("bench.csv"),
                Quantity::Voltage,
                &BinOptions::default(),
            )
            .expect("parses")
        })
    });
    let grid = step
        .drt
        .grid(rec.bins[0].time_s, rec.bins[rec.bins.len() - 1].time_s)
        .expect("grid");
    let basis = Basis::new(BasisKind::Gaussian, &grid);
    let times: Vec<f64> = rec.bins.iter().map(|b| b.time_s).collect();
    let vars: Vec<f64> = rec.bins.iter().map(|b| b.time_var_s2).collect();
    c.bench_function("kernel/step_gaussian", |b| {
        b.iter(|| step_kernel(black_box(&basis), StepShape::Rise, &times, &vars))
    });
}

criterion_group! {
    name = transient;
    config = Criterion::default().without_plots();
    targets = benches
}
criterion_main!(transient);
