//! The process-count ladder of `taumap model`: circuits of 1 to 4 processes
//! (Voigt, ZARC and finite Warburg elements mixed) simulated with relative
//! noise, inverted, and the circuit chosen by BIC compared with the truth.
//!
//! `cargo run --release --example model_ladder [NOISE_REL] [SEEDS]`
//! (defaults 0.005 and 5 seeds per count: 20 spectra).

use std::time::Instant;
use taumap::circuit::fit::FitData;
use taumap::circuit::propose::{ProposeOptions, propose};
use taumap::io::Spectrum;
use taumap::pipeline::{InvertParams, invert};
use taumap::synth::{add_noise, cells, log_frequencies};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let noise: f64 = args.get(1).map_or(Ok(0.005), |s| s.parse())?;
    let seeds: u64 = args.get(2).map_or(Ok(5), |s| s.parse())?;
    let f = log_frequencies(1e-2, 1e6, 10.0);
    let mut right = 0;
    let mut total = 0;
    for processes in 1..=4 {
        for seed in 0..seeds {
            let cell = cells::model_ladder(processes, seed);
            let (mut re, mut im) = cell.sample(&f);
            add_noise(&mut re, &mut im, noise, seed + 7);
            let t0 = Instant::now();
            let spectrum = Spectrum::new(f.clone(), re.clone(), im.clone())?;
            let inv = invert(&spectrum, &InvertParams::default())?;
            let data = FitData::new(&f, &re, &im)?;
            let sel = propose(&data, &inv.drt, &ProposeOptions::default())?;
            let ms = t0.elapsed().as_secs_f64() * 1e3;
            let got = sel.chosen().processes;
            total += 1;
            right += usize::from(got == processes);
            let kinds: Vec<&str> = sel
                .chosen()
                .fit
                .elements
                .iter()
                .map(|e| e.element.kind().name())
                .collect();
            let truth: Vec<&str> = cell.0.iter().map(|e| e.kind().name()).collect();
            let bics: Vec<String> = sel
                .candidates
                .iter()
                .map(|c| format!("{}:{:.1}", c.processes, c.fit.bic))
                .collect();
            println!(
                "{processes} seed {seed}: chose {got} {} peaks {} | truth {truth:?} | got {kinds:?} | {} | {ms:.1} ms",
                if got == processes { "ok " } else { "BAD" },
                sel.peaks.len(),
                bics.join(" ")
            );
        }
    }
    println!("right count: {right}/{total}");
    Ok(())
}
