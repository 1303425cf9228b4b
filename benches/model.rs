//! Criterion benchmarks of `taumap model` without files or plots: the
//! inversion that seeds the candidates, the proposal and CNLS fits of
//! candidates of 1 to 4 processes (K = 4), and one CNLS fit alone.
//!
//! Spectrum: 81 points, 10 per decade from 1e-2 to 1e6 Hz, the demo cell's
//! kind of circuit (series resistor, inductor, two ZARCs, a transmissive
//! finite Warburg element) with 0.5 % noise, seed 3. Results:
//! docs/performance.md.

use criterion::{Criterion, criterion_group, criterion_main};
use std::hint::black_box;
use taumap::circuit::fit::{FitData, FitOptions, fit_circuit};
use taumap::circuit::propose::{ProposeOptions, propose};
use taumap::io::Spectrum;
use taumap::pipeline::{InvertParams, invert};
use taumap::synth::{Series, add_noise, cells, log_frequencies};

/// The demo cell (`cells::demo_button_cell`).
fn cell() -> Series {
    cells::demo_button_cell()
}

fn model_benches(c: &mut Criterion) {
    let f = log_frequencies(1e-2, 1e6, 10.0);
    assert_eq!(f.len(), 81);
    let (mut re, mut im) = cell().sample(&f);
    add_noise(&mut re, &mut im, 0.005, 3);
    let spectrum = Spectrum::new(f.clone(), re.clone(), im.clone()).expect("valid spectrum");
    let data = FitData::new(&f, &re, &im).expect("valid data");
    let opts = ProposeOptions::default();
    c.bench_function("model_k4_81_points", |b| {
        b.iter(|| {
            let inv = invert(black_box(&spectrum), &InvertParams::default()).expect("inversion");
            let sel = propose(&data, &inv.drt, &opts).expect("candidates");
            black_box(sel.chosen().processes)
        })
    });
    let inv = invert(&spectrum, &InvertParams::default()).expect("inversion");
    c.bench_function("model_propose_only_k4", |b| {
        b.iter(|| {
            black_box(
                propose(&data, black_box(&inv.drt), &opts)
                    .expect("candidates")
                    .chosen,
            )
        })
    });
    c.bench_function("cnls_fit_3_processes", |b| {
        b.iter(|| {
            black_box(
                fit_circuit(&data, black_box(&cell().0), &[], &FitOptions::default())
                    .expect("fit")
                    .chi2,
            )
        })
    });
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(30).without_plots();
    targets = model_benches
}
criterion_main!(benches);
