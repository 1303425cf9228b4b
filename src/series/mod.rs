//! Series of spectra (over cycling, state of charge, temperature): batch
//! inversion on one grid, peaks linked into tracks, trends of each track.
//!
//! - [`batch`]: every spectrum on one common tau grid, plans shared by
//!   spectra of equal frequencies, in parallel; the lambda policy.
//! - [`link`]: the peaks of neighbouring spectra assigned to tracks with
//!   stable ids (global nearest neighbour, Hungarian method).
//! - [`trend`]: least-squares slopes with standard errors and Arrhenius
//!   activation energies.
//!
//! [`Tracker`] holds what linking and the trends need (per linked peak a
//! small record and a coarse profile of its region, a few dozen numbers),
//! so a caller can stream each spectrum's distribution to disk and drop it. [`track_series`] runs all of it on spectra in memory.

pub mod batch;
pub mod link;
pub mod trend;

pub use batch::{BatchInverter, LambdaPolicy, PILOT_SPECTRA, Pilot, pilot_positions};
pub use link::{LinkOptions, Linker, PeakPoint};
pub use trend::{Activation, K_B_EV_PER_K, LineFit, TemperatureUnit, arrhenius, fit_line};

use crate::io::Spectrum;
use crate::pipeline::{Distribution, InvertParams, SpectrumInversion};
use crate::{Error, Result};

/// One linked peak: a point of a track.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct TrackPoint {
    /// 0-based position of the spectrum in the series.
    pub spectrum: usize,
    /// The spectrum's label (cycle, state of charge, temperature), if any.
    pub label: Option<f64>,
    /// Track id: the persistent tracks 1, 2, ... in order of appearance
    /// (by their first spectrum, then ascending tau), the short-lived ones
    /// numbered after them.
    pub track: u32,
    /// Peak time constant (s): where the distribution is highest.
    pub tau_s: f64,
    /// The process's median time constant (s): the tau that splits its
    /// resistance in halves (the median of `ln tau` weighted by the
    /// distribution over the peak's region and the regions of the
    /// short-lived peaks folded into it). For a symmetric peak (ZARC,
    /// Voigt) it is the peak's tau; unlike the maximum it does not move
    /// when ripple reshapes the top of a broad peak, so the trends use it.
    pub tau_median_s: f64,
    /// The process's resistance in this spectrum (ohm): its peak's area
    /// plus the areas of the short-lived peaks folded into it (see
    /// [`Tracker::finish`]).
    pub r_ohm: f64,
    /// The distribution at the peak (ohm per unit ln tau).
    pub gamma_ohm: f64,
    /// Whether the track has at least the minimum number of points (a
    /// process followed along the series) rather than a short-lived peak.
    pub persistent: bool,
    /// The area of this peak alone (ohm), before folding.
    pub r_peak_ohm: f64,
    /// The peak's confidence (the fraction of posterior draws with a peak
    /// in its region) when the distribution has bands; peaks below the
    /// bands' support level are never linked.
    pub confidence: Option<f64>,
}

/// The trend of one track.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Trend {
    /// Track id.
    pub track: u32,
    /// Spectra in which the track has a peak.
    pub points: usize,
    /// First and last spectrum position with a peak.
    pub first_spectrum: usize,
    /// Last spectrum position with a peak.
    pub last_spectrum: usize,
    /// Trend axis value (label, or position without labels) of the first
    /// point.
    pub first_x: f64,
    /// Trend axis value of the last point.
    pub last_x: f64,
    /// Median tau ([`TrackPoint::tau_median_s`]) of the first point (s).
    pub tau_first_s: f64,
    /// Median tau of the last point (s).
    pub tau_last_s: f64,
    /// R of the first point (ohm).
    pub r_first_ohm: f64,
    /// R of the last point (ohm).
    pub r_last_ohm: f64,
    /// `tau_last / tau_first - 1`.
    pub tau_change_rel: f64,
    /// `r_last / r_first - 1`.
    pub r_change_rel: f64,
    /// log10(tau_median / s) against the trend axis.
    pub log10_tau_line: Option<LineFit>,
    /// R (ohm) against the trend axis.
    pub r_line: Option<LineFit>,
    /// Arrhenius fit of 1/tau, when the labels are temperatures.
    pub ea_tau: Option<Activation>,
    /// Arrhenius fit of 1/R, when the labels are temperatures.
    pub ea_r: Option<Activation>,
}

/// A peak as linked, with what folding needs.
#[derive(Clone, Debug)]
struct LinkedPeak {
    track: Option<u32>,
    confidence: Option<f64>,
    tau_s: f64,
    area: f64,
    /// The distribution over the peak's region: (ln tau, gamma) at
    /// [`PROFILE_PER_DECADE`] points per decade.
    profile: Vec<(f32, f32)>,
    height: f64,
    /// The distribution at the lower and upper end of the peak's region
    /// (the separating minima, or the grid's ends).
    valley_lo: f64,
    valley_hi: f64,
}

#[derive(Clone, Debug)]
struct Observed {
    spectrum: usize,
    label: Option<f64>,
    peaks: Vec<LinkedPeak>,
}

/// Linking state and the linked peaks of a series: a few dozen numbers per
/// peak ([`PROFILE_PER_DECADE`]), whatever the size of the distributions.
#[derive(Clone, Debug)]
pub struct Tracker {
    linker: Linker,
    observed: Vec<Observed>,
    labels_complete: bool,
}

/// The tracks of a series after [`Tracker::finish`].
#[derive(Clone, Debug)]
pub struct TrackSet {
    /// Every linked peak, in series order, ascending tau within a spectrum.
    pub points: Vec<TrackPoint>,
    /// Ids of the short-lived tracks (fewer points than the minimum).
    pub short_tracks: Vec<u32>,
    /// Whether every spectrum had a label (the trend axis is then the
    /// label; otherwise the spectrum position).
    pub labelled: bool,
}

impl Tracker {
    /// An empty tracker.
    pub fn new(link: LinkOptions) -> Result<Self> {
        Ok(Self {
            linker: Linker::new(link)?,
            observed: Vec::new(),
            labels_complete: true,
        })
    }

    /// Links the peaks of `drt`, the distribution of spectrum `spectrum`
    /// (ascending positions over calls; a skipped spectrum is simply not
    /// pushed).
    pub fn push(&mut self, spectrum: usize, label: Option<f64>, drt: &Distribution) {
        self.labels_complete &= label.is_some();
        // With bands, a peak below the support level is not offered to
        // the linker: it starts no track and is folded into a neighbour.
        let confidence: Vec<Option<f64>> = (0..drt.peaks.len())
            .map(|i| {
                drt.bands
                    .as_ref()
                    .and_then(|b| b.peaks.get(i))
                    .map(|pb| pb.confidence)
            })
            .collect();
        let support = drt.bands.as_ref().map_or(0.0, |b| b.support);
        let offered: Vec<PeakPoint> = drt
            .peaks
            .iter()
            .zip(&confidence)
            .map(|(p, c)| PeakPoint {
                tau_s: p.tau_s,
                r_ohm: if c.is_some_and(|c| c < support) {
                    f64::NAN
                } else {
                    p.area
                },
            })
            .collect();
        let ids = self.linker.push(spectrum, &offered);
        let at = |tau_s: f64| gamma_at(drt, tau_s);
        let peaks = drt
            .peaks
            .iter()
            .zip(ids)
            .zip(confidence)
            .map(|((p, track), confidence)| LinkedPeak {
                track,
                confidence,
                tau_s: p.tau_s,
                profile: profile(drt, p.tau_lo_s, p.tau_hi_s),
                area: p.area,
                height: p.height,
                valley_lo: at(p.tau_lo_s),
                valley_hi: at(p.tau_hi_s),
            })
            .collect();
        self.observed.push(Observed {
            spectrum,
            label,
            peaks,
        });
    }

    /// Tracks started so far.
    pub fn tracks_started(&self) -> u32 {
        self.linker.tracks_started()
    }

    /// The tracks. A track with fewer than `min_points` points is
    /// short-lived: a ripple of the regularised solution or a feature
    /// at the detection limit, not a process to follow. In each spectrum,
    /// the area of a short-lived peak is folded into its neighbour across
    /// the shallower of its two separating minima (the rule by which the
    /// peak finder merges a maximum that is not a peak, [`crate::peaks`]),
    /// so that a ripple in the valley between two processes does not take
    /// resistance from them: the persistent tracks' `r_ohm` add up to the
    /// total of the spectrum's peaks.
    pub fn finish(&self, min_points: usize) -> TrackSet {
        let min_points = min_points.max(1);
        let mut counts: std::collections::HashMap<u32, usize> = std::collections::HashMap::new();
        for o in &self.observed {
            for p in &o.peaks {
                if let Some(t) = p.track {
                    *counts.entry(t).or_default() += 1;
                }
            }
        }
        let persistent = |t: Option<u32>| t.is_some_and(|t| counts[&t] >= min_points);
        // Final ids: the persistent tracks 1, 2, ... in order of their
        // first peak (ascending tau within a spectrum), then the
        // short-lived ones after them in the same order.
        let mut raw: Vec<u32> = counts.keys().copied().collect();
        raw.sort_unstable();
        let (long, short): (Vec<u32>, Vec<u32>) =
            raw.into_iter().partition(|t| counts[t] >= min_points);
        let final_id: std::collections::HashMap<u32, u32> = long
            .iter()
            .chain(&short)
            .enumerate()
            .map(|(k, t)| (*t, k as u32 + 1))
            .collect();
        let mut points = Vec::new();
        for o in &self.observed {
            // Fold the short-lived peaks (and those without a track) into
            // their neighbours: r[i] is the folded area of peak i.
            let n = o.peaks.len();
            let mut alive: Vec<usize> = (0..n).collect();
            let mut r: Vec<f64> = o.peaks.iter().map(|p| p.area).collect();
            let mut lo: Vec<f64> = o.peaks.iter().map(|p| p.valley_lo).collect();
            let mut hi: Vec<f64> = o.peaks.iter().map(|p| p.valley_hi).collect();
            // The peaks whose regions each peak holds after folding.
            let mut holds: Vec<Vec<usize>> = (0..n).map(|i| vec![i]).collect();
            while alive.len() > 1 {
                let Some(k) = alive.iter().position(|&i| !persistent(o.peaks[i].track)) else {
                    break;
                };
                if alive.iter().all(|&i| !persistent(o.peaks[i].track)) {
                    break;
                }
                let i = alive[k];
                let left = (k > 0).then(|| alive[k - 1]);
                let right = alive.get(k + 1).copied();
                let into_left = match (left, right) {
                    (Some(_), Some(_)) => lo[i] >= hi[i],
                    (Some(_), None) => true,
                    _ => false,
                };
                let j = if into_left {
                    let j = left.expect("a left neighbour");
                    hi[j] = hi[i];
                    j
                } else {
                    let j = right.expect("a right neighbour");
                    lo[j] = lo[i];
                    j
                };
                r[j] += r[i];
                let moved = std::mem::take(&mut holds[i]);
                holds[j].extend(moved);
                r[i] = 0.0;
                alive.remove(k);
            }
            for (i, p) in o.peaks.iter().enumerate() {
                let Some(track) = p.track else { continue };
                let keep = persistent(p.track);
                points.push(TrackPoint {
                    spectrum: o.spectrum,
                    label: o.label,
                    track: final_id[&track],
                    tau_s: p.tau_s,
                    tau_median_s: median_tau(holds[i].iter().map(|&k| &o.peaks[k].profile))
                        .unwrap_or(p.tau_s),
                    r_ohm: if keep { r[i] } else { p.area },
                    gamma_ohm: p.height,
                    persistent: keep,
                    r_peak_ohm: p.area,
                    confidence: p.confidence,
                });
            }
        }
        let short_tracks: Vec<u32> = short.iter().map(|t| final_id[t]).collect();
        TrackSet {
            points,
            short_tracks,
            labelled: self.labels_complete && !self.observed.is_empty(),
        }
    }
}

/// Points per decade of the profile a peak keeps for its median: as fine
/// as the default grid, so a series' memory grows by a few dozen numbers
/// per peak (about 0.5 kB per spectrum), not by whole distributions.
pub const PROFILE_PER_DECADE: f64 = 10.0;

/// The distribution of `drt` over `[tau_lo_s, tau_hi_s]` at about
/// [`PROFILE_PER_DECADE`] points per decade (every k-th output sample, the
/// region's last sample included).
fn profile(drt: &Distribution, tau_lo_s: f64, tau_hi_s: f64) -> Vec<(f32, f32)> {
    let idx: Vec<usize> = (0..drt.tau_s.len())
        .filter(|&i| (tau_lo_s..=tau_hi_s).contains(&drt.tau_s[i]))
        .collect();
    let (Some(&first), Some(&last)) = (idx.first(), idx.last()) else {
        return Vec::new();
    };
    let n = drt.tau_s.len();
    let dy = if n > 1 {
        (drt.tau_s[n - 1] / drt.tau_s[0]).ln() / (n - 1) as f64
    } else {
        1.0
    };
    let stride = ((std::f64::consts::LN_10 / PROFILE_PER_DECADE) / dy)
        .floor()
        .max(1.0) as usize;
    let mut keep: Vec<usize> = (first..=last).step_by(stride).collect();
    if keep.last() != Some(&last) {
        keep.push(last);
    }
    keep.iter()
        .map(|&i| (drt.tau_s[i].ln() as f32, drt.gamma[i].max(0.0) as f32))
        .collect()
}

/// The median time constant of the distribution over the given regions:
/// `exp(y)` where the cumulative integral of gamma over `ln tau`
/// (trapezoids within each region) reaches half its total, interpolated
/// linearly. `None` without mass.
fn median_tau<'a>(profiles: impl Iterator<Item = &'a Vec<(f32, f32)>>) -> Option<f64> {
    let mut pts: Vec<(f64, f64)> = profiles
        .flatten()
        .map(|&(y, g)| (f64::from(y), f64::from(g)))
        .collect();
    pts.sort_by(|a, b| a.0.total_cmp(&b.0));
    pts.dedup_by(|a, b| a.0 == b.0);
    let cum: Vec<f64> = std::iter::once(0.0)
        .chain(pts.windows(2).scan(0.0, |c, w| {
            *c += 0.5 * (w[0].1 + w[1].1) * (w[1].0 - w[0].0);
            Some(*c)
        }))
        .collect();
    let total = *cum.last()?;
    if total.is_nan() || total <= 0.0 {
        return None;
    }
    let half = 0.5 * total;
    let k = cum.partition_point(|&c| c < half).clamp(1, cum.len() - 1);
    let (c0, c1) = (cum[k - 1], cum[k]);
    let f = if c1 > c0 {
        (half - c0) / (c1 - c0)
    } else {
        0.5
    };
    Some((pts[k - 1].0 + f * (pts[k].0 - pts[k - 1].0)).exp())
}

/// The distribution of `drt` at `tau_s` (nearest output sample).
fn gamma_at(drt: &Distribution, tau_s: f64) -> f64 {
    let n = drt.tau_s.len();
    if n == 0 {
        return 0.0;
    }
    let i = drt.tau_s.partition_point(|&t| t < tau_s).min(n - 1);
    let i = if i > 0
        && (drt.tau_s[i - 1].ln() - tau_s.ln()).abs() < (drt.tau_s[i].ln() - tau_s.ln()).abs()
    {
        i - 1
    } else {
        i
    };
    drt.gamma[i]
}

impl TrackSet {
    /// The trend of every persistent track, by id. With `temperature`, the
    /// labels are temperatures in that unit and each trend gets its
    /// Arrhenius fits (fails for a label at or below absolute zero, or
    /// without labels).
    pub fn trends(&self, temperature: Option<TemperatureUnit>) -> Result<Vec<Trend>> {
        if temperature.is_some() && !self.labelled {
            return Err(Error::Config(
                "an Arrhenius fit needs a temperature label for every spectrum".into(),
            ));
        }
        let labelled = self.labelled;
        let mut by_track: std::collections::BTreeMap<u32, Vec<&TrackPoint>> =
            std::collections::BTreeMap::new();
        for p in self.points.iter().filter(|p| p.persistent) {
            by_track.entry(p.track).or_default().push(p);
        }
        let x_of = |p: &TrackPoint| match (labelled, p.label) {
            (true, Some(l)) => l,
            _ => p.spectrum as f64,
        };
        let mut out = Vec::new();
        for (track, pts) in by_track {
            let (first, last) = (pts[0], pts[pts.len() - 1]);
            let x: Vec<f64> = pts.iter().map(|p| x_of(p)).collect();
            let log_tau: Vec<f64> = pts.iter().map(|p| p.tau_median_s.log10()).collect();
            let r: Vec<f64> = pts.iter().map(|p| p.r_ohm).collect();
            let (ea_tau, ea_r) = match temperature {
                Some(unit) => {
                    let t_k = x
                        .iter()
                        .map(|&l| unit.kelvin(l))
                        .collect::<Result<Vec<f64>>>()?;
                    let tau: Vec<f64> = pts.iter().map(|p| p.tau_median_s).collect();
                    (arrhenius(&t_k, &tau), arrhenius(&t_k, &r))
                }
                None => (None, None),
            };
            out.push(Trend {
                track,
                points: pts.len(),
                first_spectrum: first.spectrum,
                last_spectrum: last.spectrum,
                first_x: x[0],
                last_x: x[x.len() - 1],
                tau_first_s: first.tau_median_s,
                tau_last_s: last.tau_median_s,
                r_first_ohm: first.r_ohm,
                r_last_ohm: last.r_ohm,
                tau_change_rel: last.tau_median_s / first.tau_median_s - 1.0,
                r_change_rel: last.r_ohm / first.r_ohm - 1.0,
                log10_tau_line: fit_line(&x, &log_tau),
                r_line: fit_line(&x, &r),
                ea_tau,
                ea_r,
            });
        }
        Ok(out)
    }
}

/// Options of a whole series run.
#[derive(Clone, Debug, PartialEq)]
pub struct SeriesParams {
    /// Inversion parameters of every spectrum (the grid ends are set to
    /// the series' common grid unless given).
    pub invert: InvertParams,
    /// How lambda is chosen along the series.
    pub lambda_policy: LambdaPolicy,
    /// Peak linking.
    pub link: LinkOptions,
    /// Tracks with fewer points get no trend (a peak seen once or twice
    /// is not a process to follow).
    pub min_track_points: usize,
    /// The labels are temperatures in this unit (Arrhenius fits).
    pub temperature: Option<TemperatureUnit>,
}

impl Default for SeriesParams {
    /// Default inversion, one lambda for the series (the better policy on
    /// the synthetic series of docs/series.md), default linking, trends
    /// from 3 points, no temperature.
    fn default() -> Self {
        Self {
            invert: InvertParams::default(),
            lambda_policy: LambdaPolicy::Series,
            link: LinkOptions::default(),
            min_track_points: 3,
            temperature: None,
        }
    }
}

/// A series run on spectra in memory.
#[derive(Debug)]
pub struct SeriesResult {
    /// The inversion of each spectrum (or why it failed), in series order.
    pub inversions: Vec<Result<SpectrumInversion>>,
    /// The series lambda ([`LambdaPolicy::Series`]), else `None`.
    pub lambda: Option<f64>,
    /// The tracks.
    pub tracks: TrackSet,
    /// Trends of the persistent tracks.
    pub trends: Vec<Trend>,
}

/// Inverts, links and trends a series of spectra held in memory, with
/// optional labels (`labels` empty, or one per spectrum).
///
/// ```
/// use taumap::io::Spectrum;
/// use taumap::series::{track_series, SeriesParams};
/// use taumap::synth::{log_frequencies, Element, Series};
///
/// let f = log_frequencies(1e-1, 1e5, 10.0);
/// let spectra: Vec<Spectrum> = (0..6)
///     .map(|i| {
///         let cell = Series(vec![
///             Element::Resistor { r_ohm: 1.0 },
///             Element::Voigt { r_ohm: 10.0, tau_s: 1e-4 },
///             Element::Voigt { r_ohm: 20.0 + i as f64, tau_s: 1e-1 },
///         ]);
///         let (re, im) = cell.sample(&f);
///         Spectrum::new(f.clone(), re, im).unwrap()
///     })
///     .collect();
/// let run = track_series(&spectra, &[], &SeriesParams::default())?;
/// assert_eq!(run.trends.len(), 2);
/// assert!((run.trends[1].r_line.unwrap().slope - 1.0).abs() < 0.05);
/// # Ok::<(), taumap::Error>(())
/// ```
pub fn track_series(
    spectra: &[Spectrum],
    labels: &[f64],
    params: &SeriesParams,
) -> Result<SeriesResult> {
    if !labels.is_empty() && labels.len() != spectra.len() {
        return Err(Error::Data(format!(
            "{} spectra but {} labels",
            spectra.len(),
            labels.len()
        )));
    }
    let (lo, hi) = frequency_span(spectra)
        .ok_or_else(|| Error::Data("a series needs at least one spectrum".into()))?;
    let mut batch = BatchInverter::new(&params.invert, lo, hi)?;
    let refs: Vec<&Spectrum> = spectra.iter().collect();
    let lambda = match params.lambda_policy {
        LambdaPolicy::Each => None,
        LambdaPolicy::Series => {
            let pilot: Vec<&Spectrum> = pilot_positions(spectra.len())
                .into_iter()
                .map(|i| refs[i])
                .collect();
            let fixed = batch.pilot(&pilot)?;
            batch = batch.with_pilot(&fixed)?;
            Some(fixed.lambda)
        }
    };
    let inversions = batch.invert_all(&refs);
    let mut tracker = Tracker::new(params.link)?;
    for (i, inv) in inversions.iter().enumerate() {
        if let Ok(inv) = inv {
            tracker.push(i, labels.get(i).copied(), &inv.drt);
        }
    }
    let tracks = tracker.finish(params.min_track_points);
    let trends = tracks.trends(params.temperature)?;
    Ok(SeriesResult {
        inversions,
        lambda,
        tracks,
        trends,
    })
}

/// The lowest and highest frequency (Hz) over `spectra`, `None` when empty.
pub fn frequency_span(spectra: &[Spectrum]) -> Option<(f64, f64)> {
    spectra
        .iter()
        .filter(|s| !s.frequency_hz.is_empty())
        .map(|s| (s.frequency_hz[0], s.frequency_hz[s.frequency_hz.len() - 1]))
        .reduce(|a, b| (a.0.min(b.0), a.1.max(b.1)))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_median_splits_the_area_in_halves() {
        // A symmetric triangle on [0, 2] in ln tau: median at 1.
        let tri: Vec<(f32, f32)> = (0..=20)
            .map(|i| {
                let y = i as f32 * 0.1;
                (y, 1.0 - (y - 1.0).abs())
            })
            .collect();
        let m = median_tau(std::iter::once(&tri)).unwrap();
        assert!((m.ln() - 1.0).abs() < 1e-6, "{}", m.ln());
        // A second region of equal area on [3, 5] moves the median into
        // the gap's start (cumulative half reached at y = 2).
        let second: Vec<(f32, f32)> = tri.iter().map(|&(y, g)| (y + 3.0, g)).collect();
        let m = median_tau([&tri, &second].into_iter()).unwrap();
        assert!((m.ln() - 2.0).abs() < 1e-6, "{}", m.ln());
        // A right-angled triangle rising to y = 1: the half area lies at
        // 1/sqrt(2) of the way (linear interpolation of a 0.1 grid: within 1e-2).
        let ramp: Vec<(f32, f32)> = (0..=10).map(|i| (i as f32 * 0.1, i as f32 * 0.1)).collect();
        let m = median_tau(std::iter::once(&ramp)).unwrap();
        assert!((m.ln() - 0.5f64.sqrt()).abs() < 1e-2, "{}", m.ln());
        assert!(median_tau(std::iter::once(&vec![(0.0f32, 0.0f32), (1.0, 0.0)])).is_none());
    }
}
