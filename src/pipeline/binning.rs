//! Log-time binning of step transients: long records reduced, while they are
//! read, to a few bins per decade of time.
//!
//! Bin `k` holds `10^(k/b) <= t < 10^((k+1)/b)` for `b` bins per decade.
//! Early bins narrower than the sampling interval hold one sample each, so
//! nothing is lost where the signal changes fastest; late bins of a long
//! record hold many. Each bin keeps its sample count `n`, the mean time, the
//! variance of its times and the mean value, in memory proportional to the
//! number of decades, not the number of samples. Averaging `n` samples of
//! independent noise of variance `sigma^2` gives a mean of variance
//! `sigma^2/n`, so the fit weights each bin by `sqrt(n)`: the weighted
//! least-squares problem of the means has the same minimiser as that of the
//! raw samples, up to the within-bin curvature of the model, which the kernel
//! corrects to second order (see [`crate::kernel::step`]) (common practice in
//! data reduction; e.g. P. R. Bevington, D. K. Robinson (2003), *Data
//! Reduction and Error Analysis for the Physical Sciences*, 3rd ed.,
//! McGraw-Hill, ch. 4, weighted mean).
//!
//! The file reader ([`crate::io::transient`]) feeds samples in one at a
//! time; [`BinnedTransient::from_samples`] does the same for samples in
//! memory.

use crate::error::{Error, Result};

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
    /// Samples at `t > fit_end_s` are skipped (a drift or a later event at
    /// the end of the record); infinity keeps them all.
    pub fit_end_s: f64,
    /// When the step happened on the file's time axis (s): every time is
    /// taken relative to it, so a logger's clock need not start at the step.
    pub step_time_s: f64,
}

impl Default for BinOptions {
    fn default() -> Self {
        Self {
            bins_per_decade: DEFAULT_BINS_PER_DECADE,
            fit_start_s: 0.0,
            fit_end_s: f64::INFINITY,
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
    /// Number of samples at `t > fit_end_s` (skipped).
    pub late_samples: usize,
    /// Time of the first response sample fitted (s).
    pub first_time_s: f64,
    /// Time of the last sample fitted, the record length (s).
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
pub(crate) struct Accumulator {
    binner: LogBinner,
    fit_start_s: f64,
    fit_end_s: f64,
    step_time_s: f64,
    pre_sum: f64,
    pre_n: usize,
    at_step: usize,
    early: usize,
    late: usize,
    first_t: f64,
    last_t: f64,
    last_fit_t: f64,
}

impl Accumulator {
    pub(crate) fn new(opts: &BinOptions) -> Result<Self> {
        if !(opts.fit_start_s.is_finite() && opts.fit_start_s >= 0.0) {
            return Err(Error::Param {
                name: "fit-start",
                expected: "a time in seconds >= 0",
                value: opts.fit_start_s,
            });
        }
        if !(opts.fit_end_s > opts.fit_start_s && opts.fit_end_s > 0.0) {
            return Err(Error::Param {
                name: "fit-end",
                expected: "a time in seconds after the step and after fit-start",
                value: opts.fit_end_s,
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
            fit_end_s: opts.fit_end_s,
            step_time_s: opts.step_time_s,
            pre_sum: 0.0,
            pre_n: 0,
            at_step: 0,
            early: 0,
            late: 0,
            first_t: f64::NAN,
            last_t: f64::NEG_INFINITY,
            last_fit_t: f64::NAN,
        })
    }

    /// Adds a sample at time `t` on the file's axis.
    pub(crate) fn push(&mut self, t_file: f64, v: f64) -> Result<()> {
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
        } else if t > self.fit_end_s {
            self.late += 1;
            Ok(())
        } else {
            if self.first_t.is_nan() {
                self.first_t = t;
            }
            self.last_fit_t = t;
            self.binner.push(t, v)
        }
    }

    pub(crate) fn finish(self) -> BinnedTransient {
        let response_samples = self.binner.samples();
        BinnedTransient {
            bins: self.binner.finish(),
            pre_step_mean: (self.pre_n > 0).then(|| self.pre_sum / self.pre_n as f64),
            pre_step_samples: self.pre_n,
            response_samples,
            at_step_samples: self.at_step,
            early_samples: self.early,
            late_samples: self.late,
            first_time_s: self.first_t,
            // The record's last fitted sample; without any, its last sample.
            last_time_s: if self.last_fit_t.is_nan() {
                self.last_t
            } else {
                self.last_fit_t
            },
        }
    }
}
