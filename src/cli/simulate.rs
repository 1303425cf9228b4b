//! `taumap simulate`: the impedance spectrum of an equivalent-circuit model
//! file (docs/model-format.md), or its voltage response to a current step,
//! written in the input format that `taumap invert` (or `taumap transient
//! --current-step-a`) reads.
//!
//! The CSV writers here are shared with `taumap demo`, so every synthetic
//! file taumap writes has one layout: `# ` comment lines, the canonical
//! header, then one row per point with ten significant digits
//! ([`taumap::report::num`]).

use super::args::SimulateArgs;
use anyhow::{Result, bail};
use std::fmt::Write as _;
use std::io::Write as _;
use std::path::Path;
use taumap::circuit::{Model, Series};
use taumap::io::write::write_atomic;
use taumap::report::num;
use taumap::synth::{add_noise, add_white_noise, log_frequencies, log_times};

/// The most points (frequencies, or samples with those at rest) one run
/// writes.
pub const MAX_POINTS: usize = 100_000;

/// Samples at rest written before a current step (at t = -k * from-s,
/// k = 10..1), so that the reader takes the pre-step voltage from them.
pub const PRE_STEP_SAMPLES: usize = 10;

/// Points per decade when `--per-decade` is not given: for spectra, and
/// for step responses (a logging recorder samples densely).
const DEFAULT_PER_DECADE: (f64, f64) = (10.0, 100.0);

/// `comments` as `# ` lines (a comment holding line breaks gives one line
/// each; an empty one gives `#`).
fn push_comments(out: &mut String, comments: &[String]) {
    for c in comments {
        for line in c.split('\n') {
            if line.is_empty() {
                out.push_str("#\n");
            } else {
                let _ = writeln!(out, "# {line}");
            }
        }
    }
}

/// A spectrum as `taumap invert` reads it: `comments` as `# ` lines, the
/// header `frequency_hz,z_re_ohm,z_im_ohm`, then one row per frequency
/// (values by [`num`]). The slices have one entry per frequency.
pub fn spectrum_csv(comments: &[String], frequency_hz: &[f64], re: &[f64], im: &[f64]) -> String {
    let mut out = String::new();
    push_comments(&mut out, comments);
    out.push_str("frequency_hz,z_re_ohm,z_im_ohm\n");
    for ((f, re), im) in frequency_hz.iter().zip(re).zip(im) {
        let _ = writeln!(out, "{},{},{}", num(*f), num(*re), num(*im));
    }
    out
}

/// A voltage record as `taumap transient` reads it: `comments` as `# `
/// lines, the header `time_s,voltage_v`, then one row per sample.
pub fn transient_csv(comments: &[String], time_s: &[f64], voltage_v: &[f64]) -> String {
    let mut out = String::new();
    push_comments(&mut out, comments);
    out.push_str("time_s,voltage_v\n");
    for (t, v) in time_s.iter().zip(voltage_v) {
        let _ = writeln!(out, "{},{}", num(*t), num(*v));
    }
    out
}

/// Points of a log grid from `from` to `to` at `per_decade` (as
/// [`log_frequencies`] makes it), computed without making it.
fn grid_points(from: f64, to: f64, per_decade: f64) -> f64 {
    ((to / from).log10() * per_decade).round() + 1.0
}

/// Checks a range option pair: `from` positive and finite, `to` finite
/// and above it.
fn check_range(
    from: f64,
    to: f64,
    names: (&'static str, &'static str),
    expected: (&'static str, &'static str),
) -> taumap::Result<()> {
    if !(from.is_finite() && from > 0.0) {
        return Err(taumap::Error::Param {
            name: names.0,
            expected: expected.0,
            value: from,
        });
    }
    if !(to.is_finite() && to > from) {
        return Err(taumap::Error::Param {
            name: names.1,
            expected: expected.1,
            value: to,
        });
    }
    Ok(())
}

/// What to write, from the options, checked.
enum Plan {
    Spectrum { frequency_hz: Vec<f64> },
    Step { current_a: f64, time_s: Vec<f64> },
}

fn plan(a: &SimulateArgs) -> taumap::Result<Plan> {
    let per_decade = a.per_decade.unwrap_or(if a.step_current_a.is_some() {
        DEFAULT_PER_DECADE.1
    } else {
        DEFAULT_PER_DECADE.0
    });
    if !(1.0..=1000.0).contains(&per_decade) {
        return Err(taumap::Error::Param {
            name: "per-decade",
            expected: "between 1 and 1000 points per decade",
            value: per_decade,
        });
    }
    if !(0.0..=1.0).contains(&a.noise_rel) {
        return Err(taumap::Error::Param {
            name: "noise-rel",
            expected: "a relative noise level from 0 to 1 (0.001 for 0.1 %)",
            value: a.noise_rel,
        });
    }
    match a.step_current_a {
        None => {
            check_range(
                a.from_hz,
                a.to_hz,
                ("from-hz", "to-hz"),
                (
                    "a positive frequency in Hz",
                    "a frequency in Hz above from-hz",
                ),
            )?;
            let n = grid_points(a.from_hz, a.to_hz, per_decade);
            if n > MAX_POINTS as f64 {
                return Err(taumap::Error::Config(format!(
                    "the spectrum would have {n} frequencies (more than {MAX_POINTS}); narrow \
                     --from-hz/--to-hz or lower --per-decade"
                )));
            }
            Ok(Plan::Spectrum {
                frequency_hz: log_frequencies(a.from_hz, a.to_hz, per_decade),
            })
        }
        Some(current_a) => {
            if !(current_a.is_finite() && current_a != 0.0) {
                return Err(taumap::Error::Param {
                    name: "step-current-a",
                    expected: "a finite, non-zero current in A",
                    value: current_a,
                });
            }
            check_range(
                a.from_s,
                a.to_s,
                ("from-s", "to-s"),
                (
                    "a positive time in seconds",
                    "a time in seconds after from-s",
                ),
            )?;
            let n = grid_points(a.from_s, a.to_s, per_decade) + PRE_STEP_SAMPLES as f64;
            if n > MAX_POINTS as f64 {
                return Err(taumap::Error::Config(format!(
                    "the record would have {n} samples (more than {MAX_POINTS}, with the \
                     {PRE_STEP_SAMPLES} at rest); narrow --from-s/--to-s or lower --per-decade"
                )));
            }
            let mut time_s: Vec<f64> = (1..=PRE_STEP_SAMPLES)
                .rev()
                .map(|k| -(k as f64) * a.from_s)
                .collect();
            time_s.extend(log_times(a.from_s, a.to_s, per_decade));
            Ok(Plan::Step { current_a, time_s })
        }
    }
}

/// The model's text as comment lines, indented under `model:`.
fn model_comments(model: &Model) -> Vec<String> {
    let mut c = vec!["model:".to_string()];
    c.extend(model.to_text().lines().map(|l| format!("  {l}")));
    c
}

/// `v` to six significant digits, without trailing zeros (`100000`, not
/// `99999.99999999999`), in exponent form below 1e-3 (`1e-6`).
fn short(v: f64) -> String {
    let v: f64 = format!("{v:.5e}").parse().unwrap_or(v);
    if v != 0.0 && v.abs() < 1e-3 {
        format!("{v:e}")
    } else {
        format!("{v}")
    }
}

fn noise_phrase(noise_rel: f64, what: &str, seed: u64) -> String {
    if noise_rel > 0.0 {
        format!("noise {} % of {what} (seed {seed})", 100.0 * noise_rel)
    } else {
        "no noise".to_string()
    }
}

/// The spectrum of `series` at `frequency_hz`, with noise; an error when
/// the model's impedance leaves double precision.
fn spectrum(
    series: &Series,
    frequency_hz: &[f64],
    a: &SimulateArgs,
) -> Result<(Vec<f64>, Vec<f64>)> {
    let (mut re, mut im) = series.sample(frequency_hz);
    if let Some(i) = (0..re.len()).find(|&i| !(re[i].is_finite() && im[i].is_finite())) {
        bail!(
            "{}: the model's impedance is not finite at {} Hz (a value of the model is too \
             large or too small)",
            a.model.display(),
            frequency_hz[i]
        );
    }
    if a.noise_rel > 0.0 {
        add_noise(&mut re, &mut im, a.noise_rel, a.seed);
    }
    Ok((re, im))
}

/// The voltage change from rest after a current step of `current_a` at
/// each of `time_s` (zero before the step), with white noise of
/// noise-rel times the largest change.
fn step_response(
    series: &Series,
    current_a: f64,
    time_s: &[f64],
    a: &SimulateArgs,
) -> Result<Vec<f64>> {
    let mut v: Vec<f64> = time_s
        .iter()
        .map(|&t| {
            if t > 0.0 {
                current_a * series.current_step_ohm(t)
            } else {
                0.0
            }
        })
        .collect();
    if let Some(i) = v.iter().position(|x| !x.is_finite()) {
        bail!(
            "{}: the model's step response is not finite at {} s (a value of the model is too \
             large or too small)",
            a.model.display(),
            time_s[i]
        );
    }
    let span = v.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    if a.noise_rel > 0.0 {
        add_white_noise(&mut v, a.noise_rel * span, a.seed);
    }
    Ok(v)
}

/// Runs the subcommand.
pub fn run(a: &SimulateArgs) -> Result<()> {
    let plan = plan(a)?;
    let model = Model::read(&a.model)?;
    let series = model.series();
    let name = a.model.display();
    let (text, what) = match &plan {
        Plan::Spectrum { frequency_hz } => {
            let (re, im) = spectrum(&series, frequency_hz, a)?;
            let first = short(frequency_hz.first().copied().unwrap_or(a.from_hz));
            let last = short(frequency_hz.last().copied().unwrap_or(a.to_hz));
            let mut comments = vec![
                format!("taumap simulate: impedance spectrum of the model {name}"),
                format!(
                    "{first} Hz to {last} Hz, {} frequencies; {}",
                    frequency_hz.len(),
                    noise_phrase(a.noise_rel, "|Z| on each part", a.seed)
                ),
            ];
            comments.extend(model_comments(&model));
            (
                spectrum_csv(&comments, frequency_hz, &re, &im),
                format!("{} frequencies", frequency_hz.len()),
            )
        }
        Plan::Step { current_a, time_s } => {
            let v = step_response(&series, *current_a, time_s, a)?;
            let mut comments = vec![
                format!(
                    "taumap simulate: voltage response of the model {name} to a current step of \
                     {current_a} A at t = 0, from rest"
                ),
                format!(
                    "voltage_v is the change from the voltage at rest; {PRE_STEP_SAMPLES} samples \
                     at rest, then {} s to {} s; {}",
                    short(a.from_s),
                    short(a.to_s),
                    noise_phrase(a.noise_rel, "the largest change", a.seed)
                ),
                format!("read it with: taumap transient FILE --current-step-a {current_a}"),
            ];
            comments.extend(model_comments(&model));
            (
                transient_csv(&comments, time_s, &v),
                format!("{} samples", time_s.len()),
            )
        }
    };
    if a.out == Path::new("-") {
        let mut stdout = std::io::stdout().lock();
        stdout.write_all(text.as_bytes())?;
        stdout.flush()?;
        eprintln!("wrote {what} to standard output");
        return Ok(());
    }
    if a.out.is_dir() {
        bail!(
            "{}: is a folder, not a file (give a file name, e.g. --out {})",
            a.out.display(),
            a.out.join("simulated.csv").display()
        );
    }
    write_atomic(&a.out, text.as_bytes())?;
    println!("wrote {what} to {}", a.out.display());
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn writers_put_comments_header_and_rows() {
        let s = spectrum_csv(
            &["a".into(), "b\n\n  c".into()],
            &[1.0, 10.0],
            &[2.0, 3.0],
            &[-0.5, -0.25],
        );
        assert_eq!(
            s,
            "# a\n# b\n#\n#   c\nfrequency_hz,z_re_ohm,z_im_ohm\n\
             1.000000000e0,2.000000000e0,-5.000000000e-1\n\
             1.000000000e1,3.000000000e0,-2.500000000e-1\n"
        );
        let t = transient_csv(&[], &[-1e-6, 2e-3], &[0.0, 0.125]);
        assert_eq!(
            t,
            "time_s,voltage_v\n-1.000000000e-6,0.000000000e0\n2.000000000e-3,1.250000000e-1\n"
        );
    }

    #[test]
    fn grid_size_is_known_before_the_grid_is_made() {
        for (from, to, per) in [(0.01, 1e5, 10.0), (1e-6, 100.0, 100.0), (1.0, 2.0, 7.0)] {
            assert_eq!(
                grid_points(from, to, per) as usize,
                log_frequencies(from, to, per).len()
            );
        }
    }
}
