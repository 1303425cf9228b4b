//! `taumap demo`: writes the demo scenario and inverts it.
//!
//! Scenario (invented for this demo): an anode-supported solid-oxide button
//! cell, 1 cm2, measured at 700 C at open circuit. Its spectrum holds a series
//! resistance (electrolyte and contacts), lead inductance, a fast depressed arc
//! (anode charge transfer), a slower near-ideal arc (cathode) and a
//! finite-length gas-diffusion response, with 0.3 % proportional noise. The
//! same cell is also pulse-tested: from rest at open circuit, a discharge
//! current step of 0.1 A (0.1 A/cm2, small enough for a linear response) is
//! applied at t = 0 and the voltage is logged on a logarithmic time base.
//! The series: the same cell through 20 thermal cycles (cooled to room
//! temperature and heated back at a few kelvin per minute), measured at
//! 700 C after each: the cathode arc grows and slows as its contact to the
//! electrolyte degrades, the series resistance creeps up, the anode arc
//! stays, and from cycle 10 a small slow arc of a cracked current-collector
//! contact appears and grows. All values are illustrative, not
//! measurements.

use super::args::DemoArgs;
use super::invert::{default_out_dir, invert_into, report_run};
use super::simulate::transient_csv;
use super::transient::{self, transient_into};
use anyhow::Result;
use clap::Parser;
use taumap::io::transient::read_transient;
use taumap::io::write::write_atomic;
use taumap::io::{Spectrum, read_spectrum};
use taumap::pipeline::bands::BandOptions;
use taumap::pipeline::binning::BinOptions;
use taumap::pipeline::{DrtOptions, InvertParams, StepKind, TransientParams};
use taumap::synth::{Element, Series, add_noise, add_white_noise, log_frequencies, log_times};

/// Name of the demo spectrum file.
pub const SPECTRUM_FILE: &str = "button-cell-700c.csv";

/// Name of the demo pulse-test file.
pub const PULSE_FILE: &str = "button-cell-700c-pulse.csv";

/// Discharge step of the pulse test (A); negative: current out of the
/// positive terminal.
pub const PULSE_CURRENT_A: f64 = -0.1;

/// Folder of the demo series (one file per thermal cycle).
pub const SERIES_DIR: &str = "thermal-cycles";

/// Thermal cycles in the demo series (files for cycles 0 to this).
pub const SERIES_CYCLES: usize = 20;

/// The demo cell after `cycle` thermal cycles (0 to [`SERIES_CYCLES`]).
pub fn demo_cell_after(cycle: usize) -> Series {
    let x = cycle as f64 / SERIES_CYCLES as f64;
    let mut e = vec![
        Element::Resistor {
            r_ohm: 0.150 * (1.0 + 0.1 * x),
        },
        Element::Inductor { l_h: 8.0e-8 },
        Element::Zarc {
            r_ohm: 0.080,
            tau_s: 2.0e-5,
            phi: 0.85,
        },
        Element::Zarc {
            r_ohm: 0.120 * (1.0 + 0.5 * x),
            tau_s: 1.0e-3 * (1.0 + 0.6 * x),
            phi: 0.95,
        },
        Element::WarburgFinite {
            r_ohm: 0.050,
            tau_s: 0.5,
        },
    ];
    if cycle >= SERIES_CYCLES / 2 {
        let y = (cycle - SERIES_CYCLES / 2) as f64 / (SERIES_CYCLES / 2) as f64;
        e.push(Element::Zarc {
            r_ohm: 0.012 + 0.028 * y,
            tau_s: 0.015,
            phi: 0.9,
        });
    }
    Series(e)
}

/// Open-circuit voltage before the pulse (V).
const OPEN_CIRCUIT_V: f64 = 1.05;

/// The demo cell as a series of analytical elements
/// ([`taumap::synth::cells::demo_button_cell`], shared with the benchmarks).
pub fn demo_cell() -> Series {
    taumap::synth::cells::demo_button_cell()
}

/// The demo spectrum: 0.1 Hz to 100 kHz, 10 points per decade, seed 2026.
pub fn demo_spectrum() -> Result<Spectrum> {
    let f = log_frequencies(0.1, 1e5, 10.0);
    let (mut re, mut im) = demo_cell().sample(&f);
    add_noise(&mut re, &mut im, 0.003, 2026);
    Ok(Spectrum::new(f, re, im)?)
}

/// The demo pulse test: 40 samples at rest (-40 ms..-1 ms), then 100 per
/// decade from 1 us to 5 s; 20 uV white noise (seed 2027). Returns
/// (time_s, voltage_v).
pub fn demo_pulse() -> (Vec<f64>, Vec<f64>) {
    let cell = demo_cell();
    let mut t: Vec<f64> = (1..=40).rev().map(|k| -(k as f64) * 1e-3).collect();
    t.extend(log_times(1e-6, 5.0, 100.0));
    let mut v: Vec<f64> = t
        .iter()
        .map(|&t| {
            if t < 0.0 {
                OPEN_CIRCUIT_V
            } else {
                OPEN_CIRCUIT_V + PULSE_CURRENT_A * cell.current_step_ohm(t)
            }
        })
        .collect();
    add_white_noise(&mut v, 20e-6, 2027);
    (t, v)
}

fn pulse_csv(t: &[f64], v: &[f64]) -> String {
    transient_csv(
        &[
            "taumap demo: pulse test of the button cell of button-cell-700c.csv".into(),
            "at rest at open circuit, then a discharge step of -0.1 A at t = 0; 20 uV noise, seed 2027".into(),
        ],
        t,
        v,
    )
}

fn spectrum_csv(s: &Spectrum) -> String {
    super::simulate::spectrum_csv(
        &[
            "taumap demo: anode-supported solid-oxide button cell, 1 cm2, 700 C, open circuit".into(),
            "synthetic: R 0.150 ohm + L 80 nH + ZARC(0.080 ohm, 20 us, 0.85)".into(),
            "  + ZARC(0.120 ohm, 1 ms, 0.95) + finite Warburg(0.050 ohm, 0.5 s), 0.3 % noise, seed 2026".into(),
        ],
        &s.frequency_hz,
        &s.z_re_ohm,
        &s.z_im_ohm,
    )
}

/// Runs the subcommand.
pub fn run(a: &DemoArgs) -> Result<()> {
    std::fs::create_dir_all(&a.dir).map_err(|e| taumap::Error::Io {
        path: a.dir.clone(),
        source: e,
    })?;
    let path = a.dir.join(SPECTRUM_FILE);
    write_atomic(&path, spectrum_csv(&demo_spectrum()?).as_bytes())?;
    // Read back through the public reader, as a user's file would be.
    let spectrum = read_spectrum(&path)?;
    let params = InvertParams {
        drt: DrtOptions {
            all_curves: true,
            // As the command line does by default.
            bands: Some(BandOptions::default()),
            ..DrtOptions::default()
        },
        ..InvertParams::default()
    };
    let out = default_out_dir(&path);
    let (summary, written) = invert_into(&path, &spectrum, &params, &out, true, Vec::new())?;
    println!("demo spectrum: {}", path.display());
    report_run(&summary, &out, &written, false)?;
    println!("plots: {}", out.join("drt.png").display());
    for name in ["nyquist.png", "bode.png", "lambda.png"] {
        println!("       {}", out.join(name).display());
    }

    let pulse_path = a.dir.join(PULSE_FILE);
    let (t, v) = demo_pulse();
    write_atomic(&pulse_path, pulse_csv(&t, &v).as_bytes())?;
    let bins = BinOptions::default();
    let mut tparams = TransientParams::new(StepKind::CurrentStep {
        current_a: PULSE_CURRENT_A,
    });
    let record = read_transient(&pulse_path, tparams.step.quantity(), &bins)?;
    tparams.drt.all_curves = true;
    tparams.drt.bands = Some(BandOptions::default());
    let pulse_out = default_out_dir(&pulse_path);
    let (tsummary, twritten) =
        transient_into(&pulse_path, &record, &bins, &tparams, &pulse_out, true)?;
    println!();
    println!("demo pulse test: {}", pulse_path.display());
    transient::report_run(&tsummary, &pulse_out, &twritten, false)?;
    println!("plots: {}", pulse_out.join("transient.png").display());
    println!("       {}", pulse_out.join("drt.png").display());

    let series_dir = a.dir.join(SERIES_DIR);
    std::fs::create_dir_all(&series_dir).map_err(|e| taumap::Error::Io {
        path: series_dir.clone(),
        source: e,
    })?;
    let f = log_frequencies(0.1, 1e5, 10.0);
    for cycle in 0..=SERIES_CYCLES {
        let (mut re, mut im) = demo_cell_after(cycle).sample(&f);
        add_noise(&mut re, &mut im, 0.003, 3000 + cycle as u64);
        let s = Spectrum::new(f.clone(), re, im)?;
        let mut text = format!(
            "# taumap demo: the button cell of {SPECTRUM_FILE} at 700 C after {cycle} thermal \
             cycles; synthetic, 0.3 % noise, seed {}\n",
            3000 + cycle
        );
        text.push_str(
            spectrum_csv(&s)
                .lines()
                .skip(3)
                .collect::<Vec<_>>()
                .join("\n")
                .as_str(),
        );
        text.push('\n');
        write_atomic(
            &series_dir.join(format!("cycle-{cycle:02}.csv")),
            text.as_bytes(),
        )?;
    }
    println!();
    println!("demo series: {}", series_dir.display());
    let dir = series_dir.to_string_lossy().into_owned();
    let cli = super::args::Cli::try_parse_from([
        "taumap",
        "track",
        dir.as_str(),
        "--label-unit",
        "cycle",
    ])
    .map_err(|e| anyhow::anyhow!("{e}"))?;
    if let super::args::Command::Track(t) = cli.command {
        super::track::run(&t)?;
    }
    let track_dir = series_dir.with_file_name(format!("{SERIES_DIR}-track"));
    println!("plots: {}", track_dir.join("heatmap.png").display());
    println!("       {}", track_dir.join("trends.png").display());
    Ok(())
}
