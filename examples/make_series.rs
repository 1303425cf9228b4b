//! A synthetic cycling series for `taumap track`: N spectra, one CSV file per
//! cycle.
//!
//! `cargo run --release --example make_series -- N DIR` writes
//! `DIR/cycle-00001.csv` to `DIR/cycle-NNNNN.csv`, each with 81 points (10
//! per decade from 1e-2 to 1e6 Hz) of a cell that ages with the cycle
//! number c:
//!
//! - R_inf = 10 ohm * (1 + 0.1 c / 10^4),
//! - a fast ZARC of 30 ohm at 0.1 ms (phi 0.85), unchanged,
//! - a slow ZARC (phi 0.8) whose time constant drifts from 10 ms by a
//!   factor 2 per 10^4 cycles and whose resistance grows from 40 ohm by
//!   half per 10^4 cycles,
//!
//! with 0.5 % proportional noise (seed 2026 + c). The drift depends on the
//! cycle number alone, so the first 1000 files of a series of 10,000 are
//! the files of a series of 1000. Used for the series timings of
//! docs/performance.md.

use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use taumap::synth::{Element, Series, add_noise, log_frequencies};

/// Base seed of the noise; cycle c uses `SEED + c`.
const SEED: u64 = 2026;

/// Relative noise (of |Z|) on each part.
const NOISE_REL: f64 = 0.005;

/// Cycles over which the slow process doubles its time constant.
const DOUBLING_CYCLES: f64 = 1e4;

/// The cell after `cycle` cycles.
fn cell(cycle: usize) -> Series {
    let k = cycle as f64 / DOUBLING_CYCLES;
    Series(vec![
        Element::Resistor {
            r_ohm: 10.0 * (1.0 + 0.1 * k),
        },
        Element::Zarc {
            r_ohm: 30.0,
            tau_s: 1e-4,
            phi: 0.85,
        },
        Element::Zarc {
            r_ohm: 40.0 * (1.0 + 0.5 * k),
            tau_s: 1e-2 * 2f64.powf(k),
            phi: 0.8,
        },
    ])
}

/// Writes the spectrum of `cycle` to `path`.
fn write_cycle(path: &Path, cycle: usize, frequency_hz: &[f64]) -> std::io::Result<()> {
    let (mut z_re_ohm, mut z_im_ohm) = cell(cycle).sample(frequency_hz);
    add_noise(&mut z_re_ohm, &mut z_im_ohm, NOISE_REL, SEED + cycle as u64);
    let mut w = BufWriter::new(std::fs::File::create(path)?);
    writeln!(
        w,
        "# synthetic cycling series, cycle {cycle}: R_inf + ZARC + drifting ZARC, \
         {} % noise, seed {}",
        100.0 * NOISE_REL,
        SEED + cycle as u64
    )?;
    writeln!(w, "frequency_hz,z_re_ohm,z_im_ohm")?;
    for ((f, re), im) in frequency_hz.iter().zip(&z_re_ohm).zip(&z_im_ohm) {
        writeln!(w, "{f:.9e},{re:.9e},{im:.9e}")?;
    }
    w.flush()
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let usage = "usage: make_series N DIR (N spectra, DIR/cycle-00001.csv ...)";
    let (n, dir) = match args.as_slice() {
        [n, dir] => match n.parse::<usize>() {
            Ok(n) if (1..=99_999).contains(&n) => (n, PathBuf::from(dir)),
            _ => {
                eprintln!("N must be a count from 1 to 99999, got \"{n}\"\n{usage}");
                std::process::exit(2);
            }
        },
        _ => {
            eprintln!("{usage}");
            std::process::exit(2);
        }
    };
    let frequency_hz = log_frequencies(1e-2, 1e6, 10.0);
    assert_eq!(frequency_hz.len(), 81);
    if let Err(e) = std::fs::create_dir_all(&dir) {
        eprintln!("{}: {e}", dir.display());
        std::process::exit(1);
    }
    for cycle in 1..=n {
        let path = dir.join(format!("cycle-{cycle:05}.csv"));
        if let Err(e) = write_cycle(&path, cycle, &frequency_hz) {
            eprintln!("{}: {e}", path.display());
            std::process::exit(1);
        }
    }
    println!("{n} spectra written to {}", dir.display());
}
