//! Output files of a series run (`taumap track`).
//!
//! Names and columns are a contract that scripts rely on:
//! - `tracks.csv`: `spectrum,label,track,tau_s,r_ohm,gamma_ohm,persistent,r_peak_ohm,tau_median_s,confidence`,
//!   one row per linked peak in series order (`spectrum` is the 0-based
//!   position in the series, `label` empty without labels; `persistent` 1
//!   for a track followed along the series, 0 for a short-lived peak;
//!   `r_ohm` the process's resistance with short-lived neighbours folded
//!   in, `r_peak_ohm` the peak's own area, `tau_median_s` the process's median
//!   time constant, which the trends use; `confidence` empty without
//!   bands);
//! - `trends.csv`: one row per track with enough points, see
//!   [`TRENDS_HEADER`];
//! - `drt-series.csv`: `spectrum,label,tau_s,gamma_ohm`, the distribution
//!   of every spectrum at the common grid's points;
//! - `spectra.csv`: one row per input, see [`SPECTRA_HEADER`];
//! - `summary.json`: see [`SeriesSummary`].
//!
//! `drt-series.csv` and `spectra.csv` are written row by row as the series is
//! inverted ([`crate::io::write::StreamFile`]), so their size does not
//! bound the length of a series.

use super::num;
use crate::pipeline::{Distribution, SpectrumInversion};
use crate::series::{LinkOptions, TrackPoint, Trend};
use serde::Serialize;
use std::fmt::Write as _;

/// Header of `tracks.csv`.
pub const TRACKS_HEADER: &str =
    "spectrum,label,track,tau_s,r_ohm,gamma_ohm,persistent,r_peak_ohm,tau_median_s,confidence";
/// Header of `drt-series.csv`.
pub const DRT_SERIES_HEADER: &str = "spectrum,label,tau_s,gamma_ohm";
/// Header of `spectra.csv`.
pub const SPECTRA_HEADER: &str =
    "spectrum,label,input,status,r_inf_ohm,r_pol_ohm,lambda,residual_rms_rel,peaks,reason";
/// Header of `trends.csv`. Slopes are per unit of the label (per spectrum
/// without labels); the activation energies are empty unless the labels
/// are temperatures.
pub const TRENDS_HEADER: &str = "track,points,first_spectrum,last_spectrum,first_label,\
last_label,tau_first_s,tau_last_s,r_first_ohm,r_last_ohm,tau_change_rel,r_change_rel,\
log10_tau_slope,log10_tau_slope_se,r_slope_ohm,r_slope_se_ohm,ea_tau_ev,ea_tau_se_ev,ea_r_ev,\
ea_r_se_ev";

fn opt(v: Option<f64>) -> String {
    v.map(num).unwrap_or_default()
}

/// `tracks.csv` for `points`.
pub fn tracks_csv(points: &[TrackPoint]) -> String {
    let mut s = format!("{TRACKS_HEADER}\n");
    for p in points {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{},{},{}",
            p.spectrum,
            opt(p.label),
            p.track,
            num(p.tau_s),
            num(p.r_ohm),
            num(p.gamma_ohm),
            u8::from(p.persistent),
            num(p.r_peak_ohm),
            num(p.tau_median_s),
            opt(p.confidence)
        );
    }
    s
}

/// The indices of the output samples of `drt` at its grid's points
/// (the samples lie `oversample` to a grid step, aligned with the
/// centres; the nearest sample is taken).
pub fn grid_sample_indices(drt: &Distribution) -> Vec<usize> {
    let n = drt.tau_s.len();
    if n < 2 {
        return (0..n).collect();
    }
    let y0 = drt.tau_s[0].ln();
    let dy = (drt.tau_s[n - 1].ln() - y0) / (n - 1) as f64;
    drt.grid
        .ln_tau()
        .iter()
        .map(|c| (((c - y0) / dy).round().max(0.0) as usize).min(n - 1))
        .collect()
}

/// The rows of `drt-series.csv` for one spectrum, at `indices` of its
/// output samples ([`grid_sample_indices`]).
pub fn drt_series_rows(
    spectrum: usize,
    label: Option<f64>,
    drt: &Distribution,
    indices: &[usize],
) -> String {
    let mut s = String::new();
    let l = opt(label);
    for &i in indices {
        let _ = writeln!(
            s,
            "{spectrum},{l},{},{}",
            num(drt.tau_s[i]),
            num(drt.gamma[i])
        );
    }
    s
}

/// A field of a CSV row: quoted when it holds a delimiter, a quote or a
/// line break (RFC 4180).
pub fn csv_field(text: &str) -> String {
    if text.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}

/// The row of `spectra.csv` for a spectrum inverted (`Ok`) or skipped
/// (`Err`, with the reason).
pub fn spectra_row(
    spectrum: usize,
    label: Option<f64>,
    input: &str,
    result: Result<&SpectrumInversion, &str>,
) -> String {
    let head = format!("{spectrum},{},{}", opt(label), csv_field(input));
    match result {
        Ok(inv) => {
            let d = &inv.drt;
            format!(
                "{head},ok,{},{},{},{},{},{}\n",
                opt(d.series.instantaneous),
                num(d.total),
                num(d.lambda.lambda),
                num(d.residual_rms_rel),
                d.peaks.len(),
                csv_field(&d.warnings.join("; "))
            )
        }
        Err(reason) => format!("{head},skipped,,,,,,{}\n", csv_field(reason)),
    }
}

/// `trends.csv` for `trends`.
pub fn trends_csv(trends: &[Trend]) -> String {
    let mut s = format!("{TRENDS_HEADER}\n");
    for t in trends {
        let (ts, tse) = line_parts(t.log10_tau_line.as_ref());
        let (rs, rse) = line_parts(t.r_line.as_ref());
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
            t.track,
            t.points,
            t.first_spectrum,
            t.last_spectrum,
            num(t.first_x),
            num(t.last_x),
            num(t.tau_first_s),
            num(t.tau_last_s),
            num(t.r_first_ohm),
            num(t.r_last_ohm),
            num(t.tau_change_rel),
            num(t.r_change_rel),
            opt(ts),
            opt(tse),
            opt(rs),
            opt(rse),
            opt(t.ea_tau.map(|a| a.ea_ev)),
            opt(t.ea_tau.and_then(|a| a.ea_se_ev)),
            opt(t.ea_r.map(|a| a.ea_ev)),
            opt(t.ea_r.and_then(|a| a.ea_se_ev)),
        );
    }
    s
}

fn line_parts(l: Option<&crate::series::LineFit>) -> (Option<f64>, Option<f64>) {
    (l.map(|l| l.slope), l.and_then(|l| l.slope_se))
}

/// One track in `summary.json`: the columns of `trends.csv`.
#[derive(Clone, Debug, Serialize)]
pub struct TrackSummary {
    /// Track id.
    pub track: u32,
    /// Peaks in the track.
    pub points: usize,
    /// First spectrum position.
    pub first_spectrum: usize,
    /// Last spectrum position.
    pub last_spectrum: usize,
    /// Label of the first point (its position without labels).
    pub first_label: f64,
    /// Label of the last point.
    pub last_label: f64,
    /// Median tau of the first point (s).
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
    /// Slope of log10(tau_median/s) per label unit.
    pub log10_tau_slope: Option<f64>,
    /// Its standard error.
    pub log10_tau_slope_se: Option<f64>,
    /// Slope of R per label unit (ohm).
    pub r_slope_ohm: Option<f64>,
    /// Its standard error (ohm).
    pub r_slope_se_ohm: Option<f64>,
    /// Activation energy of 1/tau (eV), temperature labels only.
    pub ea_tau_ev: Option<f64>,
    /// Its standard error (eV).
    pub ea_tau_se_ev: Option<f64>,
    /// Activation energy of 1/R (eV), temperature labels only.
    pub ea_r_ev: Option<f64>,
    /// Its standard error (eV).
    pub ea_r_se_ev: Option<f64>,
}

impl From<&Trend> for TrackSummary {
    fn from(t: &Trend) -> Self {
        let (ts, tse) = line_parts(t.log10_tau_line.as_ref());
        let (rs, rse) = line_parts(t.r_line.as_ref());
        Self {
            track: t.track,
            points: t.points,
            first_spectrum: t.first_spectrum,
            last_spectrum: t.last_spectrum,
            first_label: t.first_x,
            last_label: t.last_x,
            tau_first_s: t.tau_first_s,
            tau_last_s: t.tau_last_s,
            r_first_ohm: t.r_first_ohm,
            r_last_ohm: t.r_last_ohm,
            tau_change_rel: t.tau_change_rel,
            r_change_rel: t.r_change_rel,
            log10_tau_slope: ts,
            log10_tau_slope_se: tse,
            r_slope_ohm: rs,
            r_slope_se_ohm: rse,
            ea_tau_ev: t.ea_tau.map(|a| a.ea_ev),
            ea_tau_se_ev: t.ea_tau.and_then(|a| a.ea_se_ev),
            ea_r_ev: t.ea_r.map(|a| a.ea_ev),
            ea_r_se_ev: t.ea_r.and_then(|a| a.ea_se_ev),
        }
    }
}

/// A spectrum that was skipped.
#[derive(Clone, Debug, Serialize)]
pub struct SkippedSpectrum {
    /// Its position in the series.
    pub spectrum: usize,
    /// The file (and, in a series file, the spectrum's name).
    pub input: String,
    /// Why.
    pub reason: String,
}

/// The common grid.
#[derive(Clone, Debug, Serialize)]
pub struct GridSummary {
    /// Smallest tau (s).
    pub tau_min_s: f64,
    /// Largest tau (s).
    pub tau_max_s: f64,
    /// Points per decade.
    pub per_decade: f64,
    /// Number of grid points.
    pub points: usize,
}

/// Where the labels came from and what they are.
#[derive(Clone, Debug, Serialize)]
pub struct LabelSummary {
    /// `name`, `column` or null (no labels: positions).
    pub from: Option<String>,
    /// The unit given (`K`, `degC`, any text), or null.
    pub unit: Option<String>,
    /// Whether the labels are temperatures (Arrhenius fits).
    pub temperature: bool,
}

/// `summary.json` of a series run.
#[derive(Clone, Debug, Serialize)]
pub struct SeriesSummary {
    /// Spectra in the series (inputs).
    pub spectra: usize,
    /// Spectra inverted.
    pub inverted: usize,
    /// Spectra skipped, with the reason.
    pub skipped: Vec<SkippedSpectrum>,
    /// Labels.
    pub label: LabelSummary,
    /// `series` or `each`.
    pub lambda_policy: String,
    /// The series lambda (`series` policy), else null.
    pub lambda: Option<f64>,
    /// Whether the series inductance is fitted in every spectrum, as the
    /// pilot decided (`series` policy with `--inductance auto`); null when
    /// the mode was given or each spectrum decides.
    pub inductance_fitted: Option<bool>,
    /// The same for the series capacitance.
    pub series_capacitance_fitted: Option<bool>,
    /// The common grid.
    pub grid: GridSummary,
    /// Tracks with at least `min_track_points` peaks, by id.
    pub tracks: Vec<TrackSummary>,
    /// Ids of the tracks with fewer peaks (in tracks.csv, no trend).
    pub short_tracks: Vec<u32>,
    /// Peaks linked in all.
    pub linked_peaks: usize,
    /// Doubts about the run worth showing the user.
    pub warnings: Vec<String>,
    /// Linking settings.
    pub link: LinkOptions,
    /// Tracks shorter than this get no trend.
    pub min_track_points: usize,
}

impl SeriesSummary {
    /// Pretty JSON with a final newline.
    pub fn to_json(&self) -> String {
        let mut s = serde_json::to_string_pretty(self).expect("the summary serialises");
        s.push('\n');
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fields_with_commas_are_quoted() {
        assert_eq!(csv_field("a.csv"), "a.csv");
        assert_eq!(csv_field("a,b.csv"), "\"a,b.csv\"");
        assert_eq!(csv_field("say \"x\""), "\"say \"\"x\"\"\"");
        let row = spectra_row(3, Some(25.0), "dir/a,b.csv", Err("bad, line 4"));
        assert_eq!(
            row,
            "3,2.500000000e1,\"dir/a,b.csv\",skipped,,,,,,\"bad, line 4\"\n"
        );
        assert_eq!(
            row.matches(',').count() - 2,
            SPECTRA_HEADER.matches(',').count()
        );
    }
}
