//! Reader for step transients, streamed into log-spaced time bins.
//!
//! A transient file is a delimited table (layout as in [`crate::io::table`])
//! with a time column and one measured column:
//!
//! | quantity | names | units accepted |
//! |---|---|---|
//! | time | `time_s`, `time`, `t`, `t_s` | s, ms, us (µs), ns |
//! | voltage | `voltage_v`, `voltage`, `v`, `u`, `v_v`, `ewe`, `potential`, `potential_v` | V, mV |
//! | current | `current_a`, `current`, `i`, `i_a` | A, mA, uA (µA) |
//!
//! Other columns are ignored. Times must increase strictly from row to row
//! (any spacing: linear, logarithmic, irregular). Samples at `t < 0` are the
//! pre-step state and are averaged into the baseline; a sample at exactly
//! `t = 0` belongs to neither side of the step and is skipped; samples at
//! `t > 0` are the response.
//!
//! # Reduction
//! The response is accumulated, while the file is read, into bins spaced
//! `bins_per_decade` per decade of time (bin `k` holds `10^(k/b) <= t <
//! 10^((k+1)/b)`). Early bins narrower than the sampling interval hold one
//! sample each, so nothing is lost where the signal changes fastest; late
//! bins of a long record hold many. Each bin keeps its sample count `n`, the
//! mean time, the variance of its times and the mean value, in memory
//! proportional to the number of decades, not the number of samples.
//! Averaging `n` samples of independent noise of variance `sigma^2` gives a
//! mean of variance `sigma^2/n`, so the fit weights each bin by `sqrt(n)`: the
//! weighted least-squares problem of the means has the same minimiser as that
//! of the raw samples, up to the within-bin curvature of the model, which the
//! kernel corrects to second order (see [`crate::kernel::step`]) (common
//! practice in data reduction; e.g. P. R. Bevington, D. K. Robinson (2003),
//! *Data Reduction and Error Analysis for the Physical Sciences*, 3rd ed.,
//! McGraw-Hill, ch. 4, weighted mean).

use std::fs::File;
use std::io::{BufRead, BufReader};
use std::path::Path;

use crate::error::{Error, Result};
use crate::io::table::{TableReader, split_unit};

/// The measured quantity of a transient.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Quantity {
    /// Cell voltage (V), for current steps and relaxations.
    Voltage,
    /// Cell current (A), for voltage steps.
    Current,
}

impl Quantity {
    /// The canonical header for this quantity.
    pub fn canonical_header(self) -> &'static str {
        match self {
            Quantity::Voltage => "time_s,voltage_v",
            Quantity::Current => "time_s,current_a",
        }
    }
}

const TIME_NAMES: &[&str] = &["time_s", "time", "t", "t_s"];
const VOLTAGE_NAMES: &[&str] = &[
    "voltage_v",
    "voltage",
    "v",
    "u",
    "v_v",
    "ewe",
    "potential",
    "potential_v",
];
const CURRENT_NAMES: &[&str] = &["current_a", "current", "i", "i_a"];
const TIME_UNITS: &[(&str, f64)] = &[
    ("s", 1.0),
    ("ms", 1e-3),
    ("us", 1e-6),
    ("\u{b5}s", 1e-6),
    ("\u{3bc}s", 1e-6),
    ("ns", 1e-9),
];
const VOLTAGE_UNITS: &[(&str, f64)] = &[("v", 1.0), ("mv", 1e-3)];
const CURRENT_UNITS: &[(&str, f64)] = &[
    ("a", 1.0),
    ("ma", 1e-3),
    ("ua", 1e-6),
    ("\u{b5}a", 1e-6),
    ("\u{3bc}a", 1e-6),
];

/// Default number of time bins per decade.
pub const DEFAULT_BINS_PER_DECADE: f64 = 25.0;

/// How the response is reduced before the fit.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BinOptions {
    /// Time bins per decade ([`DEFAULT_BINS_PER_DECADE`]).
    pub bins_per_decade: f64,
    /// Samples at `0 < t < fit_start_s` are skipped (instrument settling,
    /// ringing of the leads right after the step); 0 keeps them all.
    pub fit_start_s: f64,
    /// When the step happened on the file's time axis (s): every time is
    /// taken relative to it, so a logger's clock need not start at the step.
    pub step_time_s: f64,
}

impl Default for BinOptions {
    fn default() -> Self {
        Self {
            bins_per_decade: DEFAULT_BINS_PER_DECADE,
            fit_start_s: 0.0,
            step_time_s: 0.0,
        }
    }
}

/// Minimum number of response bins a transient must give.
pub const MIN_BINS: usize = 8;

/// One time bin of the response.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Bin {
    /// Number of samples averaged.
    pub count: usize,
    /// Mean time of the samples (s).
    pub time_s: f64,
    /// Variance of the sample times within the bin (s^2).
    pub time_var_s2: f64,
    /// Mean measured value (V or A).
    pub value: f64,
}

/// Streaming log-time binning of a response (see the module docs).
#[derive(Clone, Debug)]
pub struct LogBinner {
    bins_per_decade: f64,
    done: Vec<Bin>,
    open: Option<OpenBin>,
    n_samples: usize,
    t_last: f64,
}

#[derive(Clone, Copy, Debug)]
struct OpenBin {
    index: i64,
    t0: f64,
    n: usize,
    sum_dt: f64,
    sum_dt2: f64,
    sum_v: f64,
}

impl OpenBin {
    fn close(&self) -> Bin {
        let n = self.n as f64;
        let mean_dt = self.sum_dt / n;
        Bin {
            count: self.n,
            time_s: self.t0 + mean_dt,
            time_var_s2: (self.sum_dt2 / n - mean_dt * mean_dt).max(0.0),
            value: self.sum_v / n,
        }
    }
}

impl LogBinner {
    /// An empty binner; fails unless `bins_per_decade` is in `[2, 1000]`.
    pub fn new(bins_per_decade: f64) -> Result<Self> {
        if !(bins_per_decade.is_finite() && (2.0..=1000.0).contains(&bins_per_decade)) {
            return Err(Error::Param {
                name: "bins-per-decade",
                expected: "between 2 and 1000",
                value: bins_per_decade,
            });
        }
        Ok(Self {
            bins_per_decade,
            done: Vec::new(),
            open: None,
            n_samples: 0,
            t_last: 0.0,
        })
    }

    /// Adds one sample at `time_s > 0`; times must increase from call to call.
    ///
    /// Fails with [`Error::Data`] for a time that is not positive, not finite
    /// or not above the previous one.
    pub fn push(&mut self, time_s: f64, value: f64) -> Result<()> {
        if !(time_s.is_finite() && time_s > self.t_last && value.is_finite()) {
            return Err(Error::Data(format!(
                "sample at t = {time_s} s, value {value} cannot follow t = {} s \
                 (times must be positive, finite and increasing)",
                self.t_last
            )));
        }
        self.t_last = time_s;
        self.n_samples += 1;
        let index = (time_s.log10() * self.bins_per_decade).floor() as i64;
        match &mut self.open {
            Some(b) if b.index == index => {
                let dt = time_s - b.t0;
                b.n += 1;
                b.sum_dt += dt;
                b.sum_dt2 += dt * dt;
                b.sum_v += value;
            }
            _ => {
                if let Some(b) = self.open.take() {
                    self.done.push(b.close());
                }
                self.open = Some(OpenBin {
                    index,
                    t0: time_s,
                    n: 1,
                    sum_dt: 0.0,
                    sum_dt2: 0.0,
                    sum_v: value,
                });
            }
        }
        Ok(())
    }

    /// Number of samples pushed so far.
    pub fn samples(&self) -> usize {
        self.n_samples
    }

    /// The bins, in ascending time.
    pub fn finish(mut self) -> Vec<Bin> {
        if let Some(b) = self.open.take() {
            self.done.push(b.close());
        }
        self.done
    }
}

/// A transient reduced to time bins, with its pre-step baseline.
#[derive(Clone, Debug, PartialEq)]
pub struct BinnedTransient {
    /// Response bins (`t > 0`), ascending in time.
    pub bins: Vec<Bin>,
    /// Mean of the samples at `t < 0`, if there were any.
    pub pre_step_mean: Option<f64>,
    /// Number of samples at `t < 0`.
    pub pre_step_samples: usize,
    /// Number of response samples (`t > 0`) before binning.
    pub response_samples: usize,
    /// Number of samples at exactly `t = 0` (skipped).
    pub at_step_samples: usize,
    /// Number of samples at `0 < t < fit_start_s` (skipped).
    pub early_samples: usize,
    /// Time of the first response sample fitted (s).
    pub first_time_s: f64,
    /// Time of the last sample, the record length (s).
    pub last_time_s: f64,
}

impl BinnedTransient {
    /// Bins samples given in memory (times ascending, any sign), as the file
    /// reader does.
    pub fn from_samples(time_s: &[f64], value: &[f64], opts: &BinOptions) -> Result<Self> {
        if time_s.len() != value.len() {
            return Err(Error::Data(format!(
                "{} times but {} values",
                time_s.len(),
                value.len()
            )));
        }
        let mut acc = Accumulator::new(opts)?;
        for (&t, &v) in time_s.iter().zip(value) {
            acc.push(t, v)?;
        }
        Ok(acc.finish())
    }
}

/// Splits samples into pre-step baseline, step instant and binned response.
struct Accumulator {
    binner: LogBinner,
    fit_start_s: f64,
    step_time_s: f64,
    pre_sum: f64,
    pre_n: usize,
    at_step: usize,
    early: usize,
    first_t: f64,
    last_t: f64,
}

impl Accumulator {
    fn new(opts: &BinOptions) -> Result<Self> {
        if !(opts.fit_start_s.is_finite() && opts.fit_start_s >= 0.0) {
            return Err(Error::Param {
                name: "fit-start",
                expected: "a time in seconds >= 0",
                value: opts.fit_start_s,
            });
        }
        if !opts.step_time_s.is_finite() {
            return Err(Error::Param {
                name: "step-time",
                expected: "a finite time in seconds",
                value: opts.step_time_s,
            });
        }
        Ok(Self {
            binner: LogBinner::new(opts.bins_per_decade)?,
            fit_start_s: opts.fit_start_s,
            step_time_s: opts.step_time_s,
            pre_sum: 0.0,
            pre_n: 0,
            at_step: 0,
            early: 0,
            first_t: f64::NAN,
            last_t: f64::NEG_INFINITY,
        })
    }

    /// Adds a sample at time `t` on the file's axis.
    fn push(&mut self, t_file: f64, v: f64) -> Result<()> {
        let t = t_file - self.step_time_s;
        if t.is_nan() || t <= self.last_t {
            return Err(Error::Data(format!(
                "time {t} s does not increase after {} s",
                self.last_t
            )));
        }
        self.last_t = t;
        if t < 0.0 {
            self.pre_sum += v;
            self.pre_n += 1;
            Ok(())
        } else if t == 0.0 {
            self.at_step += 1;
            Ok(())
        } else if t < self.fit_start_s {
            self.early += 1;
            Ok(())
        } else {
            if self.first_t.is_nan() {
                self.first_t = t;
            }
            self.binner.push(t, v)
        }
    }

    fn finish(self) -> BinnedTransient {
        let response_samples = self.binner.samples();
        BinnedTransient {
            bins: self.binner.finish(),
            pre_step_mean: (self.pre_n > 0).then(|| self.pre_sum / self.pre_n as f64),
            pre_step_samples: self.pre_n,
            response_samples,
            at_step_samples: self.at_step,
            early_samples: self.early,
            first_time_s: self.first_t,
            last_time_s: self.last_t,
        }
    }
}

/// Opens and streams a transient file; see [`parse_transient`].
pub fn read_transient(
    path: &Path,
    quantity: Quantity,
    opts: &BinOptions,
) -> Result<BinnedTransient> {
    let file = File::open(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })?;
    parse_transient(BufReader::new(file), path, quantity, opts)
}

/// Streams a transient from `reader` into bins; `path` only labels errors.
///
/// Fails with [`Error::Parse`] at the offending line for unusable text,
/// missing, ambiguous or wrongly-united columns, non-numeric or non-finite
/// values and times that do not increase; and at the header line when fewer
/// than [`MIN_BINS`] response bins remain (too few samples after the step).
pub fn parse_transient<R: BufRead>(
    reader: R,
    path: &Path,
    quantity: Quantity,
    opts: &BinOptions,
) -> Result<BinnedTransient> {
    let example = quantity.canonical_header();
    let mut table = TableReader::new(reader, path, example)?;
    let header_err = |t: &TableReader<R>, msg: String| t.error(t.header_line, msg);
    let (names, units, what): (&[&str], &[(&str, f64)], &str) = match quantity {
        Quantity::Voltage => (VOLTAGE_NAMES, VOLTAGE_UNITS, "voltage"),
        Quantity::Current => (CURRENT_NAMES, CURRENT_UNITS, "current"),
    };
    let mut cols = [0usize; 2];
    let mut scale = [1.0f64; 2];
    for (k, (aliases, allowed, label)) in [(TIME_NAMES, TIME_UNITS, "time"), (names, units, what)]
        .into_iter()
        .enumerate()
    {
        let found = table.find_columns(aliases);
        let col = match found[..] {
            [only] => only,
            [] => {
                let other = match (quantity, label) {
                    (Quantity::Voltage, "voltage")
                        if !table.find_columns(CURRENT_NAMES).is_empty() =>
                    {
                        " (this file holds a current: use --voltage-step-v for a potential step)"
                    }
                    (Quantity::Current, "current")
                        if !table.find_columns(VOLTAGE_NAMES).is_empty() =>
                    {
                        " (this file holds a voltage: use --current-step-a or --relaxation-current-a)"
                    }
                    _ => "",
                };
                return Err(header_err(
                    &table,
                    format!(
                        "no {label} column found in header \"{}\" (expected e.g. \"{example}\"){other}",
                        table.header_text
                    ),
                ));
            }
            [a, b, ..] => {
                return Err(header_err(
                    &table,
                    format!(
                        "columns \"{}\" and \"{}\" both name the {label} (remove or rename one of them)",
                        table.column_name(a),
                        table.column_name(b)
                    ),
                ));
            }
        };
        if let (_, Some(unit)) = split_unit(table.column_name(col)) {
            let u = unit.to_lowercase();
            match allowed.iter().find(|(name, _)| *name == u) {
                Some((_, f)) => scale[k] = *f,
                None => {
                    let list: Vec<&str> = allowed.iter().map(|(n, _)| *n).collect();
                    return Err(header_err(
                        &table,
                        format!(
                            "unsupported unit \"{unit}\" in column \"{}\" (use one of {})",
                            table.column_name(col),
                            list.join(", ")
                        ),
                    ));
                }
            }
        }
        cols[k] = col;
    }

    let mut acc = Accumulator::new(opts)?;
    let mut prev: Option<(f64, usize)> = None;
    while let Some(row) = table.next_row()? {
        let t = table.number(&row, cols[0])? * scale[0];
        let v = table.number(&row, cols[1])? * scale[1];
        if let Some((tp, line)) = prev
            && t <= tp
        {
            return Err(table.error(
                row.line,
                format!(
                    "time {} does not increase after {} on line {line} (column {}; samples must be in time order)",
                    row.field(cols[0]),
                    tp / scale[0],
                    table.column_name(cols[0])
                ),
            ));
        }
        prev = Some((t, row.line));
        acc.push(t, v)
            .map_err(|e| table.error(row.line, e.to_string()))?;
    }
    let binned = acc.finish();
    if binned.bins.len() < MIN_BINS {
        return Err(table.error(
            table.header_line,
            format!(
                "need samples after the step (t > {} s) spread over at least {MIN_BINS} time bins, \
                 found {} sample(s) in {} bin(s)",
                opts.fit_start_s,
                binned.response_samples,
                binned.bins.len()
            ),
        ));
    }
    Ok(binned)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str, q: Quantity) -> Result<BinnedTransient> {
        let opts = BinOptions {
            bins_per_decade: 10.0,
            ..BinOptions::default()
        };
        parse_transient(text.as_bytes(), Path::new("pulse.csv"), q, &opts)
    }

    fn err(text: &str, q: Quantity) -> String {
        parse(text, q).expect_err("should be rejected").to_string()
    }

    fn rows(n: usize) -> String {
        (1..=n)
            .map(|k| format!("{},{}\n", k as f64 * 1e-3, 1.0 + k as f64))
            .collect()
    }

    #[test]
    fn baseline_step_instant_and_units() {
        let mut text =
            String::from("# pulse\nTime (ms);U (mV);T_cell\n-2;500;25\n-1;700;25\n0;900;25\n");
        for k in 1..=40 {
            text.push_str(&format!("{};{};25\n", k as f64, 1000.0 + k as f64));
        }
        let b = parse(&text, Quantity::Voltage).unwrap();
        assert_eq!(b.pre_step_samples, 2);
        assert!((b.pre_step_mean.unwrap() - 0.6).abs() < 1e-12);
        assert_eq!(b.at_step_samples, 1);
        assert_eq!(b.response_samples, 40);
        // First bin: the single sample at 1 ms, in seconds and volts.
        assert_eq!(b.bins[0].count, 1);
        assert!((b.bins[0].time_s - 1e-3).abs() < 1e-15);
        assert!((b.bins[0].value - 1.001).abs() < 1e-12);
        let total: usize = b.bins.iter().map(|x| x.count).sum();
        assert_eq!(total, 40);
    }

    /// Bin statistics against direct formulas: 10 samples 1..10 s (uniform)
    /// in the bin [10^(9/10)... ] checked by brute force on a known set.
    #[test]
    fn bin_mean_and_variance_are_exact() {
        let mut b = LogBinner::new(2.0).unwrap();
        // Bin k=2 at 2 per decade: 10 <= t < 31.6.
        let ts = [10.0, 12.0, 20.0, 31.0];
        for &t in &ts {
            b.push(t, 2.0 * t).unwrap();
        }
        let bins = b.finish();
        assert_eq!(bins.len(), 1);
        let mean = ts.iter().sum::<f64>() / 4.0;
        let var = ts.iter().map(|t| (t - mean).powi(2)).sum::<f64>() / 4.0;
        assert!((bins[0].time_s - mean).abs() < 1e-12);
        assert!((bins[0].time_var_s2 - var).abs() < 1e-10);
        assert!((bins[0].value - 2.0 * mean).abs() < 1e-12);
    }

    /// A uniformly sampled record of 10^5 samples at 10 us keeps at most
    /// `bins_per_decade` bins per decade plus the single-sample early bins.
    #[test]
    fn long_record_reduces_to_log_bins() {
        let t: Vec<f64> = (1..=100_000).map(|k| k as f64 * 1e-5).collect();
        let v: Vec<f64> = t.iter().map(|t| (-t / 0.01f64).exp()).collect();
        let b = BinnedTransient::from_samples(&t, &v, &BinOptions::default()).unwrap();
        // 5 decades (1e-5..1 s) at 25 per decade, +1 for the edge bin.
        assert!(b.bins.len() <= 126, "{}", b.bins.len());
        assert!(b.bins.len() >= 100, "{}", b.bins.len());
        assert_eq!(b.bins.iter().map(|x| x.count).sum::<usize>(), 100_000);
    }

    /// A logger clock that starts before the step: with `step_time_s` the
    /// same record bins exactly as one written relative to the step.
    #[test]
    fn step_time_shifts_the_time_axis() {
        let rows = |offset: f64| -> String {
            let mut s = String::from("time_s,voltage_v\n");
            for k in -20..=400 {
                // 2^-13 s steps: shifting by 2.5 s is exact in binary.
                let t = k as f64 / 8192.0;
                s.push_str(&format!(
                    "{},{}\n",
                    t + offset,
                    if k < 0 { 1.0 } else { 1.5 }
                ));
            }
            s
        };
        let opts = BinOptions::default();
        let rel = parse_transient(
            rows(0.0).as_bytes(),
            Path::new("a.csv"),
            Quantity::Voltage,
            &opts,
        )
        .unwrap();
        let shifted = BinOptions {
            step_time_s: 2.5,
            ..opts
        };
        let abs = parse_transient(
            rows(2.5).as_bytes(),
            Path::new("b.csv"),
            Quantity::Voltage,
            &shifted,
        )
        .unwrap();
        assert_eq!(abs.pre_step_samples, 20);
        assert_eq!(abs.at_step_samples + abs.response_samples, 401);
        assert_eq!(abs.bins.len(), rel.bins.len());
        for (x, y) in abs.bins.iter().zip(&rel.bins) {
            assert_eq!(x.count, y.count);
            assert!((x.time_s - y.time_s).abs() < 1e-9);
        }
    }

    #[test]
    fn errors_name_file_line_and_problem() {
        assert_eq!(
            err("time_s,voltage_v\n1e-3,1\n1e-3,2\n", Quantity::Voltage),
            "pulse.csv:3: time 1e-3 does not increase after 0.001 on line 2 (column time_s; samples must be in time order)"
        );
        assert_eq!(
            err("time_s,current_a\n1,2\n", Quantity::Voltage),
            "pulse.csv:1: no voltage column found in header \"time_s,current_a\" (expected e.g. \"time_s,voltage_v\") \
             (this file holds a current: use --voltage-step-v for a potential step)"
        );
        assert_eq!(
            err("time (h),voltage_v\n1,2\n", Quantity::Voltage),
            "pulse.csv:1: unsupported unit \"h\" in column \"time (h)\" (use one of s, ms, us, \u{b5}s, \u{3bc}s, ns)"
        );
        assert_eq!(
            err(
                &format!("time_s,voltage_v\n{}1,abc\n", rows(20)),
                Quantity::Voltage
            ),
            "pulse.csv:22: cannot read \"abc\" as a number (column voltage_v)"
        );
        assert_eq!(
            err(
                "time_s,voltage_v\n-1,3\n1e-3,1\n2e-3,1\n",
                Quantity::Voltage
            ),
            "pulse.csv:1: need samples after the step (t > 0 s) spread over at least 8 time bins, found 2 sample(s) in 2 bin(s)"
        );
        assert_eq!(
            err("t,v,voltage\n1,2,3\n", Quantity::Voltage),
            "pulse.csv:1: columns \"v\" and \"voltage\" both name the voltage (remove or rename one of them)"
        );
    }
}
