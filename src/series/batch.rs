//! Many spectra, one tau grid: the batch inversion of a series.
//!
//! Every spectrum of a series is inverted on one common grid, so that the
//! distributions can be compared point by point (a heat map, a difference)
//! and a peak's shift is not an artefact of a moved grid. The grid spans
//! the union of the spectra's bands, extended as for a single spectrum
//! ([`DrtOptions::grid`]). Spectra measured at the same frequencies share
//! one [`SpectrumPlan`] (kernel, penalty, prior, sampler): it is built once
//! per distinct set of frequencies in a batch. The spectra of a batch are
//! inverted in parallel (rayon); each result depends on its spectrum alone
//! (no warm start from a neighbour), so the output is the same for any
//! number of threads.
//!
//! Lambda: with [`LambdaPolicy::Each`] every spectrum's rule chooses its
//! own (and the automatic series terms are tested per spectrum); with
//! [`LambdaPolicy::Series`] the rule runs on a pilot sample of the series
//! and the median of its choices (in log lambda) is used for every
//! spectrum, so that a change along the series is not an artefact of a
//! changed smoothing; the automatic series terms are decided on the pilot
//! too ([`BatchInverter::pilot`]). docs/series.md compares the two
//! policies on synthetic series.

use std::collections::HashMap;
use std::f64::consts::PI;

use rayon::prelude::*;

use crate::io::Spectrum;
use crate::lambda::LambdaChoice;
use crate::pipeline::{
    CapacitanceMode, DrtOptions, InductanceMode, InvertParams, SpectrumInversion, SpectrumPlan,
};
use crate::{Error, Result};

/// How lambda is chosen along a series.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum LambdaPolicy {
    /// The rule chooses lambda for every spectrum on its own.
    Each,
    /// One lambda for the whole series: the median (in log lambda) of the
    /// rule's choices on a pilot sample of [`PILOT_SPECTRA`] spectra spread
    /// evenly over the series.
    Series,
}

/// Spectra in the pilot sample of [`LambdaPolicy::Series`] (all when the
/// series is shorter).
pub const PILOT_SPECTRA: usize = 16;

/// The positions of the pilot sample among `n` spectra: at most
/// [`PILOT_SPECTRA`], evenly spread, first and last included.
pub fn pilot_positions(n: usize) -> Vec<usize> {
    if n <= PILOT_SPECTRA {
        return (0..n).collect();
    }
    let k = PILOT_SPECTRA;
    let mut v: Vec<usize> = (0..k)
        .map(|i| ((i as f64) * (n - 1) as f64 / (k - 1) as f64).round() as usize)
        .collect();
    v.dedup();
    v
}

/// The inversion of every spectrum of a series on one grid.
#[derive(Clone, Debug)]
pub struct BatchInverter {
    params: InvertParams,
}

impl BatchInverter {
    /// An inverter for spectra whose frequencies all lie within
    /// `[f_lo_hz, f_hi_hz]`: the grid is the one a single spectrum over
    /// that band would get (or the caller's `tau_min_s`/`tau_max_s`), fixed
    /// for every spectrum.
    pub fn new(params: &InvertParams, f_lo_hz: f64, f_hi_hz: f64) -> Result<Self> {
        params.validate()?;
        if !(f_lo_hz.is_finite() && f_lo_hz > 0.0 && f_hi_hz.is_finite() && f_hi_hz > f_lo_hz) {
            return Err(Error::Data(format!(
                "the series' frequencies must span a positive band, got {f_lo_hz:e} to \
                 {f_hi_hz:e} Hz"
            )));
        }
        let grid = params
            .drt
            .grid(1.0 / (2.0 * PI * f_hi_hz), 1.0 / (2.0 * PI * f_lo_hz))?;
        let tau = grid.tau_s();
        let mut params = params.clone();
        params.drt = DrtOptions {
            tau_min_s: Some(tau[0]),
            tau_max_s: Some(tau[tau.len() - 1]),
            ..params.drt
        };
        Ok(Self { params })
    }

    /// The parameters every spectrum is inverted with (the common grid's
    /// ends in `drt.tau_min_s` / `drt.tau_max_s`).
    pub fn params(&self) -> &InvertParams {
        &self.params
    }

    /// The same inverter with lambda fixed at `lambda` for every spectrum.
    pub fn with_fixed_lambda(&self, lambda: f64) -> Result<Self> {
        let mut params = self.params.clone();
        params.drt.lambda = LambdaChoice::Fixed(lambda);
        params.validate()?;
        Ok(Self { params })
    }

    /// Inverts every spectrum, in parallel, returning the results in input
    /// order. Spectra with identical frequencies share one plan; a plan
    /// that cannot be built fails each of its spectra with its error.
    pub fn invert_all(&self, spectra: &[&Spectrum]) -> Vec<Result<SpectrumInversion>> {
        // Distinct frequency sets, in order of first appearance.
        let mut key_of: HashMap<Vec<u64>, usize> = HashMap::new();
        let mut firsts: Vec<usize> = Vec::new();
        let slot: Vec<usize> = spectra
            .iter()
            .enumerate()
            .map(|(i, s)| {
                let key: Vec<u64> = s.frequency_hz.iter().map(|f| f.to_bits()).collect();
                *key_of.entry(key).or_insert_with(|| {
                    firsts.push(i);
                    firsts.len() - 1
                })
            })
            .collect();
        let plans: Vec<std::result::Result<SpectrumPlan, String>> = firsts
            .par_iter()
            .map(|&i| {
                SpectrumPlan::new(&spectra[i].frequency_hz, &self.params).map_err(|e| e.to_string())
            })
            .collect();
        spectra
            .par_iter()
            .zip(slot.par_iter())
            .map(|(s, &k)| match &plans[k] {
                Ok(plan) => plan.invert(&s.z_re_ohm, &s.z_im_ohm, None),
                Err(msg) => Err(Error::Data(msg.clone())),
            })
            .collect()
    }

    /// The series lambda of [`LambdaPolicy::Series`]: see [`Self::pilot`].
    pub fn pilot_lambda(&self, pilot: &[&Spectrum]) -> Result<f64> {
        Ok(self.pilot(pilot)?.lambda)
    }

    /// What [`LambdaPolicy::Series`] fixes for the whole series from a
    /// pilot sample (see [`pilot_positions`]): lambda, the median of the
    /// rule's choices in log lambda, and every series term in automatic
    /// mode (inductance, series capacitance), kept when the significance
    /// test keeps it in at least half the pilot's spectra. One model for
    /// the series: a term that came and went between neighbouring spectra
    /// would move R_inf and the fastest or slowest peak with it (and it
    /// saves the test's two extra solves per spectrum). Spectra that fail
    /// are passed over; fails when none succeeds. A fixed lambda is kept.
    pub fn pilot(&self, pilot: &[&Spectrum]) -> Result<Pilot> {
        // The pilot needs the global solution only: no refinement, no bands.
        let mut quick = self.params.clone();
        quick.drt.adaptive = None;
        quick.drt.bands = None;
        quick.drt.all_curves = false;
        let quick = Self { params: quick };
        let runs: Vec<SpectrumInversion> = quick
            .invert_all(pilot)
            .into_iter()
            .filter_map(|r| r.ok())
            .collect();
        if runs.is_empty() {
            return Err(Error::Data(
                "no spectrum of the pilot sample could be inverted to choose the series lambda"
                    .into(),
            ));
        }
        let mut ln: Vec<f64> = runs.iter().map(|inv| inv.drt.lambda.lambda.ln()).collect();
        ln.sort_by(f64::total_cmp);
        let n = ln.len();
        let median = if n % 2 == 1 {
            ln[n / 2]
        } else {
            0.5 * (ln[n / 2 - 1] + ln[n / 2])
        };
        let lambda = match self.params.drt.lambda {
            LambdaChoice::Fixed(v) => v,
            LambdaChoice::Rule(_) => median.exp(),
        };
        let kept =
            |has: fn(&SpectrumInversion) -> bool| 2 * runs.iter().filter(|r| has(r)).count() >= n;
        Ok(Pilot {
            lambda,
            inductance: (self.params.inductance == InductanceMode::Auto)
                .then(|| kept(|r| r.drt.series.inductance_h.is_some())),
            series_capacitance: (self.params.series_capacitance == CapacitanceMode::Auto)
                .then(|| kept(|r| r.drt.series.series_capacitance_f.is_some())),
        })
    }

    /// The same inverter with what `pilot` fixed: lambda, and the series
    /// terms it decided (on or off for every spectrum).
    pub fn with_pilot(&self, pilot: &Pilot) -> Result<Self> {
        let mut next = self.with_fixed_lambda(pilot.lambda)?;
        if let Some(k) = pilot.inductance {
            next.params.inductance = if k {
                InductanceMode::On
            } else {
                InductanceMode::Off
            };
        }
        if let Some(k) = pilot.series_capacitance {
            next.params.series_capacitance = if k {
                CapacitanceMode::On
            } else {
                CapacitanceMode::Off
            };
        }
        Ok(next)
    }
}

/// What a pilot sample fixed for a whole series ([`BatchInverter::pilot`]).
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Pilot {
    /// The series lambda.
    pub lambda: f64,
    /// Whether the series inductance is fitted (`None`: not automatic, the
    /// caller's mode stands).
    pub inductance: Option<bool>,
    /// Whether the series capacitance is fitted (`None`: not automatic).
    pub series_capacitance: Option<bool>,
}

#[cfg(all(test, feature = "synth"))]
mod tests {
    use super::*;
    use crate::synth::{Element, Series, add_noise, log_frequencies};

    fn spectrum(f: &[f64], r_ohm: f64, seed: u64) -> Spectrum {
        let cell = Series(vec![
            Element::Resistor { r_ohm: 2.0 },
            Element::Voigt { r_ohm, tau_s: 1e-3 },
        ]);
        let (mut re, mut im) = cell.sample(f);
        add_noise(&mut re, &mut im, 1e-3, seed);
        Spectrum::new(f.to_vec(), re, im).unwrap()
    }

    #[test]
    fn one_grid_for_spectra_of_different_bands_and_same_results_as_alone() {
        let a = log_frequencies(1e-1, 1e5, 10.0);
        let b = log_frequencies(1.0, 1e4, 8.0);
        let s = [
            spectrum(&a, 10.0, 1),
            spectrum(&b, 20.0, 2),
            spectrum(&a, 30.0, 3),
        ];
        let refs: Vec<&Spectrum> = s.iter().collect();
        let batch = BatchInverter::new(&InvertParams::default(), 1e-1, 1e5).unwrap();
        let out = batch.invert_all(&refs);
        let grids: Vec<Vec<f64>> = out
            .iter()
            .map(|r| r.as_ref().unwrap().drt.grid.tau_s())
            .collect();
        assert_eq!(grids[0], grids[1]);
        assert_eq!(grids[0], grids[2]);
        // One decade beyond the widest band on either side.
        assert!((grids[0][0] - 1.0 / (2.0 * PI * 1e5) / 10.0).abs() < 1e-3 * grids[0][0]);
        for (inv, r) in out.iter().zip([10.0, 20.0, 30.0]) {
            let total = inv.as_ref().unwrap().drt.total;
            assert!((total / r - 1.0).abs() < 0.02, "{total} vs {r}");
        }
        // The shared plan gives what a plan of one's own on that grid gives.
        let alone = SpectrumPlan::new(&a, batch.params())
            .unwrap()
            .invert(&s[2].z_re_ohm, &s[2].z_im_ohm, None)
            .unwrap();
        assert_eq!(alone.drt.coeffs, out[2].as_ref().unwrap().drt.coeffs);
    }

    #[test]
    fn results_do_not_depend_on_the_thread_count() {
        let f = log_frequencies(1e-1, 1e5, 10.0);
        let s: Vec<Spectrum> = (0..8).map(|i| spectrum(&f, 10.0 + i as f64, i)).collect();
        let refs: Vec<&Spectrum> = s.iter().collect();
        let batch = BatchInverter::new(&InvertParams::default(), 1e-1, 1e5).unwrap();
        let run = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| batch.invert_all(&refs))
                .into_iter()
                .map(|r| r.unwrap().drt.coeffs)
                .collect::<Vec<_>>()
        };
        assert_eq!(run(1), run(3));
    }

    #[test]
    fn the_pilot_lambda_is_the_median_choice() {
        let f = log_frequencies(1e-1, 1e5, 10.0);
        let s: Vec<Spectrum> = (0..5).map(|i| spectrum(&f, 10.0, 10 + i)).collect();
        let refs: Vec<&Spectrum> = s.iter().collect();
        let batch = BatchInverter::new(&InvertParams::default(), 1e-1, 1e5).unwrap();
        let mut quick = batch.params().clone();
        quick.drt.adaptive = None;
        let mut each: Vec<f64> = s
            .iter()
            .map(|x| {
                SpectrumPlan::new(&f, &quick)
                    .unwrap()
                    .invert(&x.z_re_ohm, &x.z_im_ohm, None)
                    .unwrap()
                    .drt
                    .lambda
                    .lambda
            })
            .collect();
        each.sort_by(f64::total_cmp);
        let l = batch.pilot_lambda(&refs).unwrap();
        assert!((l / each[2] - 1.0).abs() < 1e-12, "{l} vs {each:?}");
        assert_eq!(pilot_positions(3), vec![0, 1, 2]);
        let p = pilot_positions(1000);
        assert_eq!((p.len(), p[0], p[15]), (16, 0, 999));
    }

    #[test]
    fn the_pilot_decides_the_series_terms_for_the_series() {
        let f = log_frequencies(1e-1, 1e6, 10.0);
        let with_l = |l_h: f64, seed: u64| {
            let cell = Series(vec![
                Element::Resistor { r_ohm: 2.0 },
                Element::Inductor { l_h },
                Element::Voigt {
                    r_ohm: 10.0,
                    tau_s: 1e-3,
                },
            ]);
            let (mut re, mut im) = cell.sample(&f);
            add_noise(&mut re, &mut im, 1e-3, seed);
            Spectrum::new(f.clone(), re, im).unwrap()
        };
        let batch = BatchInverter::new(&InvertParams::default(), 1e-1, 1e6).unwrap();
        // 1 uH: +6 ohm at 1 MHz, far above the noise; 0: none.
        for (l_h, kept) in [(1e-6, true), (0.0, false)] {
            let s: Vec<Spectrum> = (0..5).map(|i| with_l(l_h, 20 + i)).collect();
            let refs: Vec<&Spectrum> = s.iter().collect();
            let p = batch.pilot(&refs).unwrap();
            assert_eq!(p.inductance, Some(kept), "L = {l_h}");
            assert_eq!(p.series_capacitance, Some(false));
            let fixed = batch.with_pilot(&p).unwrap();
            let want = if kept {
                InductanceMode::On
            } else {
                InductanceMode::Off
            };
            assert_eq!(fixed.params().inductance, want);
            assert_eq!(fixed.params().series_capacitance, CapacitanceMode::Off);
            assert_eq!(fixed.params().drt.lambda, LambdaChoice::Fixed(p.lambda));
        }
        // A mode given by the caller is not the pilot's to decide.
        let on = InvertParams {
            inductance: InductanceMode::On,
            ..InvertParams::default()
        };
        let s: Vec<Spectrum> = (0..3).map(|i| with_l(0.0, 40 + i)).collect();
        let refs: Vec<&Spectrum> = s.iter().collect();
        let b = BatchInverter::new(&on, 1e-1, 1e6).unwrap();
        assert_eq!(b.pilot(&refs).unwrap().inductance, None);
    }
}
