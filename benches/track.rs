//! Criterion benchmarks of the series path of `taumap track` (no files, no
//! plotting).
//!
//! Spectrum: 81 points, 10 per decade from 1e-2 to 1e6 Hz, R_inf + ZARC +
//! ZARC (`cells::two_zarcs`) with 0.5 % noise. The two `per_spectrum`
//! benchmarks invert a batch of 16 noisy copies (seeds 1 to 16, the same
//! frequencies) with `BatchInverter::invert_all` on one thread and report
//! the time per spectrum (batch time / 16). `invert_all` builds the batch's
//! one shared `SpectrumPlan` inside each call, so 1/16 of a plan build is
//! included (the command builds one per chunk of 256). `link_1000_spectra`
//! links the peaks of 1000 distributions precomputed outside the timed loop.
//! Results: docs/performance.md.

use criterion::{Criterion, criterion_group, criterion_main};
use std::hint::black_box;
use std::time::{Duration, Instant};
use taumap::io::Spectrum;
use taumap::pipeline::{Distribution, InvertParams};
use taumap::series::{BatchInverter, LinkOptions, Tracker};
use taumap::synth::{Element, Series, cells, reference_spectrum};

/// Spectra per `invert_all` call in the per-spectrum benchmarks.
const BATCH: usize = 16;

/// Lambda of the shared-plan benchmark and of the precomputed
/// distributions of the linking benchmark.
const FIXED_LAMBDA: f64 = 1e-2;

fn batch_of_spectra() -> Vec<Spectrum> {
    (1..=BATCH as u64)
        .map(|seed| {
            let s = reference_spectrum(&cells::two_zarcs(), 0.005, seed)
                .expect("valid synthetic spectrum");
            assert_eq!(s.len(), 81);
            s
        })
        .collect()
}

/// The time of `iters` calls of `invert_all` on the batch, per spectrum,
/// on a pool of one thread (the cost of a spectrum, not of the machine).
fn per_spectrum(batch: &BatchInverter, refs: &[&Spectrum], iters: u64) -> Duration {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("a thread pool");
    pool.install(|| {
        let start = Instant::now();
        for _ in 0..iters {
            let out = batch.invert_all(black_box(refs));
            assert!(out.iter().all(|r| r.is_ok()));
            black_box(out);
        }
        start.elapsed() / BATCH as u32
    })
}

fn inversion_benches(c: &mut Criterion) {
    let spectra = batch_of_spectra();
    let refs: Vec<&Spectrum> = spectra.iter().collect();
    let each = BatchInverter::new(&InvertParams::default(), 1e-2, 1e6).expect("inverter");
    let shared = each.with_fixed_lambda(FIXED_LAMBDA).expect("fixed lambda");
    let mut group = c.benchmark_group("track");
    group.bench_function("per_spectrum_shared_plan", |b| {
        b.iter_custom(|iters| per_spectrum(&shared, &refs, iters))
    });
    group.bench_function("per_spectrum_rule", |b| {
        b.iter_custom(|iters| per_spectrum(&each, &refs, iters))
    });
    group.finish();
}

/// 1000 spectra of a cell whose slower process doubles its tau and grows
/// its R by half along the series, inverted once (outside the timing).
fn series_distributions(n: usize) -> Vec<Distribution> {
    let spectra: Vec<Spectrum> = (0..n)
        .map(|i| {
            let k = i as f64 / (n - 1) as f64;
            let cell = Series(vec![
                Element::Resistor { r_ohm: 10.0 },
                Element::Zarc {
                    r_ohm: 30.0,
                    tau_s: 1e-4,
                    phi: 0.85,
                },
                Element::Zarc {
                    r_ohm: 40.0 * (1.0 + 0.5 * k),
                    tau_s: 1e-2 * 2f64.powf(k),
                    phi: 0.85,
                },
            ]);
            reference_spectrum(&cell, 0.005, 1000 + i as u64).expect("valid synthetic spectrum")
        })
        .collect();
    let refs: Vec<&Spectrum> = spectra.iter().collect();
    let batch = BatchInverter::new(&InvertParams::default(), 1e-2, 1e6)
        .and_then(|b| b.with_fixed_lambda(FIXED_LAMBDA))
        .expect("inverter");
    batch
        .invert_all(&refs)
        .into_iter()
        .map(|r| r.expect("inverts").drt)
        .collect()
}

fn link_benches(c: &mut Criterion) {
    let drts = series_distributions(1000);
    let mut group = c.benchmark_group("track");
    group.bench_function("link_1000_spectra", |b| {
        b.iter(|| {
            let mut tracker = Tracker::new(LinkOptions::default()).expect("tracker");
            for (i, d) in drts.iter().enumerate() {
                tracker.push(i, Some(i as f64), black_box(d));
            }
            let tracks = tracker.finish(3);
            let trends = tracks.trends(None).expect("trends");
            assert!(trends.len() >= 2);
            black_box((tracks, trends))
        })
    });
    group.finish();
}

criterion_group! {
    name = track_benches;
    // Short runs: criterion's own HTML plots are not needed (and need
    // system fonts).
    config = Criterion::default()
        .without_plots()
        .sample_size(20)
        .measurement_time(Duration::from_secs(3));
    targets = inversion_benches, link_benches
}
criterion_main!(track_benches);
