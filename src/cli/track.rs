//! `taumap track`: a series of spectra in, one grid, tracks, trends, a heat
//! map and (for temperatures) activation energies out.
//!
//! The run streams: the inputs are read once to find the common band (and
//! which of them can be read at all), lambda is chosen on a pilot sample,
//! then the series is inverted in chunks of [`CHUNK`] spectra in parallel.
//! Each chunk's rows go to the per-spectrum tables on disk and only its
//! peaks (for linking) and its share of the heat map stay in memory. The
//! files are renamed into place together at the end.

use super::args::{LabelFrom, LambdaPolicyArg, OnOff, TrackArgs, WeightingArg};
use super::invert::drt_options_from;
use super::output::{FORMATS, fixed6, output_set, report_run};
use anyhow::{Result, bail};
use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;
use std::cmp::Ordering;
use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use taumap::io::Spectrum;
use taumap::io::spectrum::{MIN_POINTS, read_spectrum_series, read_spectrum_with};
use taumap::io::write::StreamFile;
use taumap::pipeline::{Distribution, InvertParams, LambdaChoice, SpectrumInversion, Weighting};
use taumap::plot;
use taumap::report::series::{
    self as rs, DRT_SERIES_HEADER, GridSummary, LabelSummary, SPECTRA_HEADER, SeriesSummary,
    SkippedSpectrum, TrackSummary,
};
use taumap::series::{
    BatchInverter, LinkOptions, TemperatureUnit, TrackSet, Tracker, Trend, pilot_positions,
};

/// Spectra inverted together; their results are written before the next
/// chunk is read, which bounds memory whatever the length of the series.
pub const CHUNK: usize = 256;

/// Columns of the heat map at most (spectra are averaged into them).
pub const HEAT_COLUMNS: usize = 800;

/// Rows of the heat map at most (tau samples are thinned to them).
pub const HEAT_ROWS: usize = 400;

/// Per-spectrum warnings printed on stderr before the rest are only
/// counted (all are in `spectra.csv`).
const PRINTED_WARNINGS: usize = 10;

/// A run that finished and wrote its outputs but skipped spectra: the
/// binary says so and exits with code 3.
#[derive(Debug)]
pub struct PartialRun {
    /// Spectra skipped.
    pub skipped: usize,
    /// Spectra in the series.
    pub total: usize,
    /// Where the outputs are.
    pub out: PathBuf,
}

impl std::fmt::Display for PartialRun {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "{} of {} spectra skipped (named above and in {}); the others were inverted and \
             written",
            self.skipped,
            self.total,
            self.out.join("spectra.csv").display()
        )
    }
}

impl std::error::Error for PartialRun {}

/// One spectrum of the series.
struct Input {
    /// The file, or `FILE [by=KEY]` for a spectrum of a series file.
    name: String,
    label: Option<f64>,
    source: Source,
}

enum Source {
    File(PathBuf),
    /// Index into the entries of the series file.
    Entry(usize),
}

/// The spectra of the run and how to load each.
struct Series {
    inputs: Vec<Input>,
    /// The spectra of a series file (`None` once taken for inversion).
    entries: Vec<Option<std::result::Result<Spectrum, String>>>,
    label_from: Option<LabelFrom>,
    band: (Option<f64>, Option<f64>),
    map: taumap::io::columns::ColumnMap,
}

impl Series {
    /// Reads spectrum `i` (a file anew; a series file's from memory) and
    /// keeps the points within the band.
    fn load(&self, i: usize) -> std::result::Result<Spectrum, String> {
        let s = match &self.inputs[i].source {
            Source::File(p) => read_spectrum_with(p, &self.map)
                .map(|(s, _)| s)
                .map_err(|e| e.to_string())?,
            Source::Entry(k) => match &self.entries[*k] {
                Some(Ok(s)) => s.clone(),
                Some(Err(e)) => return Err(e.clone()),
                None => return Err("already taken".into()),
            },
        };
        within_band(s, self.band)
    }
}

/// The points of `s` within `[f_min, f_max]`.
fn within_band(
    s: Spectrum,
    band: (Option<f64>, Option<f64>),
) -> std::result::Result<Spectrum, String> {
    if band.0.is_none() && band.1.is_none() {
        return Ok(s);
    }
    let (lo, hi) = (band.0.unwrap_or(0.0), band.1.unwrap_or(f64::INFINITY));
    let keep: Vec<usize> = (0..s.len())
        .filter(|&i| (lo..=hi).contains(&s.frequency_hz[i]))
        .collect();
    if keep.len() < MIN_POINTS {
        return Err(format!(
            "--f-min/--f-max keep {} of {} points; at least {MIN_POINTS} are needed",
            keep.len(),
            s.len()
        ));
    }
    let pick = |v: &[f64]| keep.iter().map(|&i| v[i]).collect::<Vec<f64>>();
    Spectrum::new(pick(&s.frequency_hz), pick(&s.z_re_ohm), pick(&s.z_im_ohm))
        .map_err(|e| e.to_string())
}

/// A piece of a file name for ordering: text, or a number compared by value.
#[derive(Debug, PartialEq)]
enum NamePart {
    Text(String),
    Number(f64),
}

/// The parts of a file name: runs of digits (with one decimal point
/// between digits) as numbers, the rest as lower-case text.
fn name_parts(name: &str) -> Vec<NamePart> {
    let mut parts = Vec::new();
    let chars: Vec<char> = name.chars().collect();
    let mut i = 0;
    while i < chars.len() {
        let start = i;
        if chars[i].is_ascii_digit() {
            while i < chars.len() && chars[i].is_ascii_digit() {
                i += 1;
            }
            if i + 1 < chars.len() && chars[i] == '.' && chars[i + 1].is_ascii_digit() {
                i += 1;
                while i < chars.len() && chars[i].is_ascii_digit() {
                    i += 1;
                }
            }
            let text: String = chars[start..i].iter().collect();
            parts.push(NamePart::Number(text.parse().unwrap_or(f64::NAN)));
        } else {
            while i < chars.len() && !chars[i].is_ascii_digit() {
                i += 1;
            }
            let text: String = chars[start..i].iter().collect();
            parts.push(NamePart::Text(text.to_lowercase()));
        }
    }
    parts
}

/// Orders file names as people number them: `cycle-9` before `cycle-10`.
fn natural_cmp(a: &str, b: &str) -> Ordering {
    let (pa, pb) = (name_parts(a), name_parts(b));
    for (x, y) in pa.iter().zip(&pb) {
        let o = match (x, y) {
            (NamePart::Number(u), NamePart::Number(v)) => u.total_cmp(v),
            (NamePart::Text(u), NamePart::Text(v)) => u.cmp(v),
            (NamePart::Number(_), NamePart::Text(_)) => Ordering::Less,
            (NamePart::Text(_), NamePart::Number(_)) => Ordering::Greater,
        };
        if o != Ordering::Equal {
            return o;
        }
    }
    pa.len().cmp(&pb.len()).then_with(|| a.cmp(b))
}

/// The last number in a file's stem (`cell2-cycle-012.csv`: 12,
/// `T650C.csv`: 650, `soc-0.5.csv`: 0.5).
fn last_number(path: &Path) -> Option<f64> {
    let stem = path.file_stem()?.to_string_lossy().into_owned();
    name_parts(&stem).into_iter().rev().find_map(|p| match p {
        NamePart::Number(v) if v.is_finite() => Some(v),
        _ => None,
    })
}

/// Whether the last number of a file's stem follows a '-' directly
/// (`T-20C.csv`): the label then lost a sign, if it was one.
fn dash_before_last_number(name: &str) -> bool {
    let stem = Path::new(name)
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    let parts = name_parts(&stem);
    match parts.iter().rposition(|p| matches!(p, NamePart::Number(_))) {
        Some(k) if k > 0 => matches!(&parts[k - 1], NamePart::Text(t) if t.ends_with('-')),
        _ => false,
    }
}

/// File extensions taken from a folder.
const SPECTRUM_EXTENSIONS: [&str; 4] = ["csv", "txt", "tsv", "dat"];

/// The files of the series: those given, a folder's spectra, ordered by
/// name unless `keep_order`.
fn collect_files(inputs: &[PathBuf], keep_order: bool) -> Result<Vec<PathBuf>> {
    let mut files = Vec::new();
    for p in inputs {
        if p.is_dir() {
            let mut found: Vec<PathBuf> = std::fs::read_dir(p)
                .map_err(|e| anyhow::anyhow!("{}: {e}", p.display()))?
                .filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|f| {
                    f.is_file()
                        && !f
                            .file_name()
                            .is_some_and(|n| n.to_string_lossy().starts_with('.'))
                        && f.extension().is_some_and(|x| {
                            SPECTRUM_EXTENSIONS
                                .contains(&x.to_string_lossy().to_lowercase().as_str())
                        })
                })
                .collect();
            if found.is_empty() {
                bail!(
                    "{}: the folder holds no spectrum files (.csv, .txt, .tsv, .dat)",
                    p.display()
                );
            }
            found.sort_by(|a, b| natural_cmp(&file_name(a), &file_name(b)));
            files.extend(found);
        } else {
            files.push(p.clone());
        }
    }
    if !keep_order {
        files.sort_by(|a, b| natural_cmp(&file_name(a), &file_name(b)));
    }
    Ok(files)
}

fn file_name(p: &Path) -> String {
    p.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
}

/// The inputs of the run, with their labels.
fn gather(a: &TrackArgs) -> Result<Series> {
    let map = a.columns.map()?;
    let band = (a.band.f_min, a.band.f_max);
    for (name, v) in [("f-min", band.0), ("f-max", band.1)] {
        if let Some(v) = v
            && !(v.is_finite() && v > 0.0)
        {
            bail!("parameter `{name}` must be a positive frequency in Hz, got {v}");
        }
    }
    if let (Some(lo), Some(hi)) = band
        && lo > hi
    {
        bail!("parameter `f-max` must be at least f-min ({lo}), got {hi}");
    }
    if let Some(path) = &a.series {
        let by = a.by.as_deref().unwrap_or_default();
        let (entries, _) = read_spectrum_series(path, &map, by)?;
        let numeric = entries.iter().all(|e| e.label.is_some());
        let label_from = match a.label_from {
            Some(LabelFrom::Name) => {
                bail!("--label-from name takes labels from file names; with --series use column")
            }
            Some(LabelFrom::Column) if !numeric => {
                let e = entries
                    .iter()
                    .find(|e| e.label.is_none())
                    .expect("one is not numeric");
                bail!(
                    "{}:{}: --label-from column: the --by value \"{}\" is not a number",
                    path.display(),
                    e.first_line,
                    e.key
                )
            }
            Some(LabelFrom::Column) => Some(LabelFrom::Column),
            Some(LabelFrom::None) => None,
            None => {
                if let Some(e) = entries.iter().find(|e| e.label.is_none())
                    && temperature_unit(a.label_unit.as_deref()).is_none()
                {
                    eprintln!(
                        "note: {}:{}: the --by value \"{}\" is not a number: no labels, the \
                         trends run against the spectrum position",
                        path.display(),
                        e.first_line,
                        e.key
                    );
                }
                numeric.then_some(LabelFrom::Column)
            }
        };
        let inputs = entries
            .iter()
            .enumerate()
            .map(|(k, e)| Input {
                name: format!("{} [{}={}]", path.display(), by, e.key),
                label: label_from.and(e.label),
                source: Source::Entry(k),
            })
            .collect();
        let entries = entries
            .into_iter()
            .map(|e| Some(e.spectrum.map_err(|e| e.to_string())))
            .collect();
        return Ok(Series {
            inputs,
            entries,
            label_from,
            band,
            map,
        });
    }
    let files = collect_files(&a.inputs, a.keep_order)?;
    let numbers: Vec<Option<f64>> = files.iter().map(|f| last_number(f)).collect();
    let label_from = match a.label_from {
        Some(LabelFrom::Column) => bail!("--label-from column needs --series FILE --by COLUMN"),
        Some(LabelFrom::Name) => {
            // (With temperature labels, the missing label is an error.)
            if let Some(i) = numbers.iter().position(Option::is_none)
                && temperature_unit(a.label_unit.as_deref()).is_none()
            {
                bail!(
                    "{}: --label-from name: the file name holds no number",
                    files[i].display()
                );
            }
            Some(LabelFrom::Name)
        }
        Some(LabelFrom::None) => None,
        None => {
            // (With temperature labels, the missing label is an error.)
            if let Some(i) = numbers.iter().position(Option::is_none)
                && temperature_unit(a.label_unit.as_deref()).is_none()
            {
                eprintln!(
                    "note: {}: the file name holds no number: no labels, the trends run against \
                     the spectrum position",
                    files[i].display()
                );
            }
            numbers
                .iter()
                .all(Option::is_some)
                .then_some(LabelFrom::Name)
        }
    };
    let inputs = files
        .into_iter()
        .zip(numbers)
        .map(|(f, n)| Input {
            name: f.display().to_string(),
            label: label_from.and(n),
            source: Source::File(f),
        })
        .collect();
    Ok(Series {
        inputs,
        entries: Vec::new(),
        label_from,
        band,
        map,
    })
}

/// `K`/`kelvin` or `degC`/`°C`/`C`/`celsius` as a temperature unit.
fn temperature_unit(unit: Option<&str>) -> Option<TemperatureUnit> {
    match unit?.trim().to_lowercase().as_str() {
        "k" | "kelvin" => Some(TemperatureUnit::Kelvin),
        "degc" | "°c" | "c" | "celsius" => Some(TemperatureUnit::Celsius),
        _ => None,
    }
}

/// The default output folder: `<folder>-track/` beside the folder of the
/// first spectrum, or `<stem>-track/` beside a series file.
fn default_out(a: &TrackArgs) -> PathBuf {
    if let Some(p) = &a.series {
        return super::invert::out_dir_named(p, "track");
    }
    let first = &a.inputs[0];
    let folder = if first.is_dir() {
        first.clone()
    } else {
        match first.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        }
    };
    let folder = std::fs::canonicalize(&folder).unwrap_or(folder);
    let name = folder
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "series".into());
    folder
        .parent()
        .unwrap_or_else(|| Path::new("."))
        .join(format!("{name}-track"))
}

/// Refuses an output folder that holds inputs: the run would read its own
/// earlier outputs as spectra, and replace or remove inputs whose names
/// are output names (`fit.csv`, `tracks.csv`).
fn refuse_input_folder(a: &TrackArgs, out: &Path) -> Result<()> {
    let Ok(out_abs) = std::fs::canonicalize(out) else {
        return Ok(()); // Not there yet: it holds nothing.
    };
    let folders = a.inputs.iter().chain(&a.series).filter_map(|p| {
        let folder = if p.is_dir() {
            p.clone()
        } else {
            match p.parent() {
                Some(q) if !q.as_os_str().is_empty() => q.to_path_buf(),
                _ => PathBuf::from("."),
            }
        };
        std::fs::canonicalize(folder).ok()
    });
    for f in folders {
        if f == out_abs {
            bail!(
                "{}: the output folder holds the series' own files (outputs would be read as \
                 spectra, and inputs named like outputs replaced); choose another --out",
                out.display()
            );
        }
    }
    Ok(())
}

/// The heat map, accumulated column by column as the spectra come.
struct Heat {
    total: usize,
    /// Sample indices kept as rows.
    rows: Vec<usize>,
    tau_s: Vec<f64>,
    /// Per column: sum of x, count, sums of gamma.
    cols: Vec<(f64, usize, Vec<f64>)>,
}

impl Heat {
    fn new(total: usize) -> Self {
        Self {
            total,
            rows: Vec::new(),
            tau_s: Vec::new(),
            cols: vec![(0.0, 0, Vec::new()); total.min(HEAT_COLUMNS)],
        }
    }

    fn add(&mut self, position: usize, x: f64, drt: &Distribution) {
        if self.rows.is_empty() {
            let n = drt.tau_s.len();
            let step = n.div_ceil(HEAT_ROWS).max(1);
            self.rows = (0..n).step_by(step).collect();
            self.tau_s = self.rows.iter().map(|&i| drt.tau_s[i]).collect();
        }
        let c = position * self.cols.len() / self.total.max(1);
        let col = &mut self.cols[c];
        if col.2.is_empty() {
            col.2 = vec![0.0; self.rows.len()];
        }
        col.0 += x;
        col.1 += 1;
        for (s, &i) in col.2.iter_mut().zip(&self.rows) {
            *s += drt.gamma.get(i).copied().unwrap_or(0.0);
        }
    }

    /// Column x (mean) and mean gamma, empty columns left out.
    fn columns(&self) -> (Vec<f64>, Vec<Vec<f64>>) {
        self.cols
            .iter()
            .filter(|c| c.1 > 0)
            .map(|(x, n, g)| {
                let n = *n as f64;
                (x / n, g.iter().map(|v| v / n).collect())
            })
            .unzip()
    }
}

/// Runs the subcommand.
pub fn run(a: &TrackArgs) -> Result<()> {
    let mut drt = drt_options_from(&a.solve, 10.0, OnOff::Off)?;
    drt.all_curves = false;
    // No table of a series reports the solver's degrees of freedom.
    drt.dof_trace = false;
    let (inductance, series_capacitance) = a.series_terms.modes();
    let params = InvertParams {
        drt,
        weighting: match a.weighting {
            WeightingArg::Modulus => Weighting::Modulus,
            WeightingArg::Unit => Weighting::Unit,
        },
        inductance,
        series_capacitance,
    };
    let link = LinkOptions {
        gate_decades: a.gate_decades,
        gate_r_factor: a.gate_r_factor,
        max_gap: a.max_gap,
    };
    link.validate()?;
    let temperature = temperature_unit(a.label_unit.as_deref());
    let out = match &a.out {
        Some(dir) if std::fs::metadata(dir).is_ok_and(|m| !m.is_dir()) => bail!(
            "{}: is a file, not a folder (choose another output folder)",
            dir.display()
        ),
        Some(dir) => dir.clone(),
        None => default_out(a),
    };
    refuse_input_folder(a, &out)?;
    let mut series = gather(a)?;
    let n = series.inputs.len();
    let labelled = series.inputs.iter().all(|i| i.label.is_some());
    if temperature.is_some() && !labelled {
        bail!(
            "--label-unit {}: an Arrhenius fit needs a temperature label for every spectrum \
             (from the file names or the --by column)",
            a.label_unit.as_deref().unwrap_or_default()
        );
    }
    let mut early_warnings = Vec::new();
    if let Some(t) = temperature {
        for i in &series.inputs {
            if let Some(l) = i.label {
                t.kelvin(l)
                    .map_err(|e| anyhow::anyhow!("{}: {e}", i.name))?;
            }
        }
        if series.label_from == Some(LabelFrom::Name)
            && let Some(i) = series
                .inputs
                .iter()
                .find(|i| dash_before_last_number(&i.name))
        {
            let w = format!(
                "{}: a '-' before the number in a file name is read as a separator, not a \
                 sign (label {}): name temperatures below zero otherwise, or give them in a \
                 --series file",
                i.name,
                i.label.unwrap_or(f64::NAN)
            );
            eprintln!("warning: {w}");
            early_warnings.push(w);
        }
    }
    // The heat map's x: the label when it rises along the series, else
    // the position.
    let label_x = labelled
        && series
            .inputs
            .windows(2)
            .all(|w| w[0].label.unwrap_or(0.0) < w[1].label.unwrap_or(0.0));
    let x_of = |i: usize, inputs: &[Input]| match (label_x, inputs[i].label) {
        (true, Some(l)) => l,
        _ => i as f64,
    };

    let bar = if std::io::stderr().is_terminal() {
        ProgressBar::new(2 * n as u64).with_style(
            ProgressStyle::with_template("{msg:>10} [{bar:40}] {pos}/{len} {elapsed} (eta {eta})")
                .expect("the template is valid")
                .progress_chars("=> "),
        )
    } else {
        ProgressBar::hidden()
    };

    // Pass 1: which inputs can be read, and the band they span.
    bar.set_message("reading");
    let spans: Vec<std::result::Result<(f64, f64), String>> = (0..n)
        .into_par_iter()
        .map(|i| {
            let r = series
                .load(i)
                .map(|s| (s.frequency_hz[0], s.frequency_hz[s.len() - 1]));
            bar.inc(1);
            r
        })
        .collect();
    let Some((f_lo, f_hi)) = spans
        .iter()
        .filter_map(|r| r.as_ref().ok())
        .copied()
        .reduce(|a, b| (a.0.min(b.0), a.1.max(b.1)))
    else {
        bar.finish_and_clear();
        let first = spans.iter().position(|r| r.is_err()).unwrap_or(0);
        bail!(
            "no spectrum of the series could be read (the first: {}: {})",
            series.inputs[first].name,
            spans[first].as_ref().err().map_or("", String::as_str)
        );
    };
    let mut batch = BatchInverter::new(&params, f_lo, f_hi)?;
    let readable: Vec<usize> = (0..n).filter(|&i| spans[i].is_ok()).collect();
    let mut pilot_terms = (None, None);
    let lambda = match (a.lambda_policy, &params.drt.lambda) {
        (LambdaPolicyArg::Series, _) => {
            bar.set_message("pilot");
            let pilot: Vec<Spectrum> = pilot_positions(readable.len())
                .into_iter()
                .filter_map(|k| series.load(readable[k]).ok())
                .collect();
            let refs: Vec<&Spectrum> = pilot.iter().collect();
            let fixed = batch.pilot(&refs)?;
            batch = batch.with_pilot(&fixed)?;
            pilot_terms = (fixed.inductance, fixed.series_capacitance);
            Some(fixed.lambda)
        }
        (_, LambdaChoice::Fixed(v)) => Some(*v),
        _ => None,
    };

    // Pass 2: invert in chunks, stream the rows, link the peaks.
    bar.set_message("inverting");
    let mut drt_csv = StreamFile::create(&out)?;
    let mut spectra_csv = StreamFile::create(&out)?;
    writeln!(drt_csv, "{DRT_SERIES_HEADER}")?;
    writeln!(spectra_csv, "{SPECTRA_HEADER}")?;
    let mut tracker = Tracker::new(link)?;
    let mut heat = Heat::new(n);
    let mut skipped: Vec<SkippedSpectrum> = Vec::new();
    let mut warned = 0usize;
    let mut grid_summary: Option<GridSummary> = None;
    for start in (0..n).step_by(CHUNK) {
        let end = (start + CHUNK).min(n);
        let loaded: Vec<std::result::Result<Spectrum, String>> = (start..end)
            .into_par_iter()
            .map(|i| match &spans[i] {
                Ok(_) => series.load(i),
                Err(e) => Err(e.clone()),
            })
            .collect();
        // The series file's spectra are not needed again.
        for i in start..end {
            if let Source::Entry(k) = series.inputs[i].source {
                series.entries[k] = None;
            }
        }
        let ok: Vec<&Spectrum> = loaded.iter().filter_map(|r| r.as_ref().ok()).collect();
        let results = batch.invert_all(&ok);
        // The rows of drt-series.csv, formatted in parallel (a hundred
        // numbers a spectrum: on one core, a tenth of the run).
        let ok_positions: Vec<usize> = (start..end)
            .zip(&loaded)
            .filter(|(_, r)| r.is_ok())
            .map(|(i, _)| i)
            .collect();
        let mut drt_rows = results
            .par_iter()
            .zip(ok_positions.par_iter())
            .map(|(r, &i)| {
                r.as_ref().ok().map(|inv| {
                    let d = &inv.drt;
                    rs::drt_series_rows(i, series.inputs[i].label, d, &rs::grid_sample_indices(d))
                })
            })
            .collect::<Vec<Option<String>>>()
            .into_iter();
        let mut inverted = results.into_iter();
        for (i, r) in (start..end).zip(&loaded) {
            let input = &series.inputs[i];
            let (result, rows): (std::result::Result<SpectrumInversion, String>, _) = match r {
                Ok(_) => (
                    inverted
                        .next()
                        .expect("one result per spectrum")
                        .map_err(|e| e.to_string()),
                    drt_rows.next().expect("one row set per spectrum"),
                ),
                Err(e) => (Err(e.clone()), None),
            };
            match &result {
                Ok(inv) => {
                    let d = &inv.drt;
                    if grid_summary.is_none() {
                        let t = d.grid.tau_s();
                        grid_summary = Some(GridSummary {
                            tau_min_s: t[0],
                            tau_max_s: t[t.len() - 1],
                            per_decade: params.drt.per_decade,
                            points: t.len(),
                        });
                    }
                    tracker.push(i, input.label, d);
                    drt_csv.write_all(rows.unwrap_or_default().as_bytes())?;
                    heat.add(i, x_of(i, &series.inputs), d);
                    for w in &d.warnings {
                        if warned < PRINTED_WARNINGS {
                            bar.suspend(|| eprintln!("warning: {}: {w}", input.name));
                        }
                        warned += 1;
                    }
                }
                Err(reason) => {
                    bar.suspend(|| eprintln!("warning: {}: skipped: {reason}", input.name));
                    skipped.push(SkippedSpectrum {
                        spectrum: i,
                        input: input.name.clone(),
                        reason: reason.clone(),
                    });
                }
            }
            spectra_csv.write_all(
                rs::spectra_row(
                    i,
                    input.label,
                    &input.name,
                    result.as_ref().map_err(String::as_str),
                )
                .as_bytes(),
            )?;
            bar.inc(1);
        }
    }
    bar.finish_and_clear();
    let grid = grid_summary.ok_or_else(|| {
        anyhow::anyhow!(
            "no spectrum of the series could be inverted (the first: {}: {})",
            skipped[0].input,
            skipped[0].reason
        )
    })?;
    if warned > PRINTED_WARNINGS {
        eprintln!(
            "note: {} more warnings about single spectra (spectra.csv, column reason)",
            warned - PRINTED_WARNINGS
        );
    }

    let inverted = n - skipped.len();
    let min_points = effective_min_points(a.min_track_points, inverted);
    let tracks = tracker.finish(min_points);
    let trends = tracks.trends(temperature)?;
    let mut warnings = early_warnings;
    if min_points < a.min_track_points.unwrap_or(0) {
        let w = format!(
            "{inverted} spectra inverted, fewer than --min-track-points: tracks need only {min_points}"
        );
        eprintln!("note: {w}");
        warnings.push(w);
    }
    if !skipped.is_empty() {
        warnings.push(format!(
            "{} of {n} spectra skipped (see skipped)",
            skipped.len()
        ));
    }
    if warned > 0 {
        warnings.push(format!(
            "{warned} warnings about single spectra (spectra.csv, column reason)"
        ));
    }
    if labelled && !label_x {
        let w = "the labels do not rise along the series: the heat map's x axis is the \
                 spectrum position"
            .to_string();
        eprintln!("note: {w}");
        warnings.push(w);
    }
    for t in &trends {
        for (what, ea) in [("1/tau", t.ea_tau), ("1/R", t.ea_r)] {
            if let Some(ea) = ea
                && !(0.0..=3.0).contains(&ea.ea_ev)
            {
                let w = format!(
                    "track {}: the activation energy of {what} is {:.3} eV, outside 0 to 3 eV \
                     (is the track one process over the whole range? check the labels' unit)",
                    t.track, ea.ea_ev
                );
                eprintln!("warning: {w}");
                warnings.push(w);
            }
        }
    }
    let summary = SeriesSummary {
        spectra: n,
        inverted: n - skipped.len(),
        skipped,
        label: LabelSummary {
            from: series.label_from.map(|l| {
                match l {
                    LabelFrom::Name => "name",
                    LabelFrom::Column => "column",
                    LabelFrom::None => "none",
                }
                .to_string()
            }),
            unit: a.label_unit.clone(),
            temperature: temperature.is_some(),
        },
        lambda_policy: match a.lambda_policy {
            LambdaPolicyArg::Series => "series",
            LambdaPolicyArg::Each => "each",
        }
        .into(),
        lambda,
        inductance_fitted: pilot_terms.0,
        series_capacitance_fitted: pilot_terms.1,
        grid,
        tracks: trends.iter().map(TrackSummary::from).collect(),
        short_tracks: tracks.short_tracks.clone(),
        linked_peaks: tracks.points.len(),
        warnings,
        link,
        min_track_points: min_points,
    };

    let mut set = output_set(&out);
    set.add("tracks.csv", rs::tracks_csv(&tracks.points))?;
    set.add("trends.csv", rs::trends_csv(&trends))?;
    set.add_streamed("drt-series.csv", drt_csv.finish()?)?;
    set.add_streamed("spectra.csv", spectra_csv.finish()?)?;
    set.add("summary.json", summary.to_json())?;
    if !a.solve.no_plots {
        add_plots(
            &mut set,
            a,
            &heat,
            &tracks,
            &trends,
            temperature,
            label_x,
            &series,
        )?;
    }
    let written = set.commit()?;
    report_run(
        a.solve.json.then(|| summary.to_json()),
        &out,
        &written,
        |w| {
            writeln!(
                w,
                "{} spectra, {} inverted, {} skipped; {} tracks{}",
                summary.spectra,
                summary.inverted,
                summary.skipped.len(),
                summary.tracks.len(),
                match summary.lambda {
                    Some(l) => format!(", lambda = {l:.3e} ({})", summary.lambda_policy),
                    None => ", lambda per spectrum".into(),
                }
            )?;
            for t in &trends {
                writeln!(w, "{}", trend_line(t))?;
            }
            Ok(())
        },
    )?;
    if summary.skipped.is_empty() {
        Ok(())
    } else {
        Err(PartialRun {
            skipped: summary.skipped.len(),
            total: n,
            out,
        }
        .into())
    }
}

/// The fewest points of a persistent track: `--min-track-points`, by
/// default 3 or 5 % of the spectra inverted, whichever is more (a ripple
/// that recurs now and then in a long series reaches any fixed count);
/// never more than the spectra inverted.
fn effective_min_points(given: Option<usize>, inverted: usize) -> usize {
    let want = given.unwrap_or_else(|| 3.max(inverted.div_ceil(20)));
    want.clamp(1, inverted.max(1))
}

/// `track 2: tau 1.00e-3 -> 2.00e-3 s (+100.0 %), r 10.000000 -> 13.000000
/// ohm (+30.0 %), Ea(tau) 0.600 +- 0.004 eV`.
fn trend_line(t: &Trend) -> String {
    let mut s = format!(
        "track {}: {} peaks, tau {:.3e} -> {:.3e} s ({:+.1} %), r {} -> {} ohm ({:+.1} %)",
        t.track,
        t.points,
        t.tau_first_s,
        t.tau_last_s,
        100.0 * t.tau_change_rel,
        fixed6(t.r_first_ohm),
        fixed6(t.r_last_ohm),
        100.0 * t.r_change_rel
    );
    for (what, ea) in [("tau", t.ea_tau), ("R", t.ea_r)] {
        if let Some(ea) = ea {
            s.push_str(&format!(", Ea({what}) {:.3}", ea.ea_ev));
            if let Some(se) = ea.ea_se_ev {
                s.push_str(&format!(" +- {se:.3}"));
            }
            s.push_str(" eV");
        }
    }
    s
}

/// The heat map, the trends and (temperatures) the Arrhenius plot.
#[allow(clippy::too_many_arguments)]
fn add_plots(
    set: &mut taumap::io::write::OutputSet,
    a: &TrackArgs,
    heat: &Heat,
    tracks: &TrackSet,
    trends: &[Trend],
    temperature: Option<TemperatureUnit>,
    label_x: bool,
    series: &Series,
) -> Result<()> {
    let unit = a.label_unit.as_deref();
    let label_name = match (series.label_from, unit) {
        (None, _) => "spectrum".to_string(),
        (Some(_), Some(u)) if temperature.is_some() => format!("temperature ({u})"),
        (Some(_), Some(u)) => format!("label ({u})"),
        (Some(_), None) => "label".to_string(),
    };
    let heat_x_label = if label_x {
        label_name.clone()
    } else {
        "spectrum".to_string()
    };
    let shown: Vec<u32> = trends.iter().map(|t| t.track).collect();
    // Per track: x on the heat map, x on the trend axis, tau, r.
    // Per track: x on the heat map, x on the trend axis, the peak's tau
    // (heat map), R, and the median tau of the trends.
    type Columns = (Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>);
    let mut per: std::collections::BTreeMap<u32, Columns> = std::collections::BTreeMap::new();
    for p in &tracks.points {
        if !shown.contains(&p.track) {
            continue;
        }
        let e = per.entry(p.track).or_default();
        let hx = match (label_x, p.label) {
            (true, Some(l)) => l,
            _ => p.spectrum as f64,
        };
        e.0.push(hx);
        e.1.push(p.label.unwrap_or(p.spectrum as f64));
        e.2.push(p.tau_s);
        e.3.push(p.r_ohm);
        e.4.push(p.tau_median_s);
    }
    let (hx, gamma) = heat.columns();
    let lines: Vec<plot::TrackLine> = per
        .iter()
        .map(|(id, c)| plot::TrackLine {
            id: *id,
            x: &c.0,
            tau_s: &c.2,
        })
        .collect();
    let trend_series: Vec<plot::TrackSeries> = per
        .iter()
        .map(|(id, c)| plot::TrackSeries {
            id: *id,
            x: &c.1,
            tau_s: &c.4,
            r_ohm: &c.3,
        })
        .collect();
    let inv_t: Vec<(u32, Vec<f64>)> = match temperature {
        Some(u) => per
            .iter()
            .map(|(id, c)| {
                (
                    *id,
                    c.1.iter()
                        .map(|&l| u.kelvin(l).map_or(f64::NAN, |t| 1.0 / t))
                        .collect(),
                )
            })
            .collect(),
        None => Vec::new(),
    };
    let arrhenius: Vec<plot::ArrheniusTrack> = inv_t
        .iter()
        .map(|(id, x)| {
            let c = &per[id];
            let t = trends.iter().find(|t| t.track == *id);
            plot::ArrheniusTrack {
                id: *id,
                inv_t_per_k: x,
                tau_s: &c.4,
                r_ohm: &c.3,
                tau_fit: t.and_then(|t| t.ea_tau).map(|e| (e.ea_ev, e.intercept)),
                r_fit: t.and_then(|t| t.ea_r).map(|e| (e.ea_ev, e.intercept)),
            }
        })
        .collect();
    for (ext, fmt) in FORMATS {
        set.add(
            format!("heatmap.{ext}"),
            plot::render_heatmap(
                &plot::HeatmapFigure {
                    x: &hx,
                    x_label: &heat_x_label,
                    tau_s: &heat.tau_s,
                    gamma: &gamma,
                    gamma_label: "gamma (ohm)",
                    tracks: &lines,
                    title: "Distribution of relaxation times along the series",
                },
                fmt,
            )?,
        )?;
        if !trend_series.is_empty() {
            set.add(
                format!("trends.{ext}"),
                plot::render_trends(
                    &plot::TrendFigure {
                        x_label: &label_name,
                        tracks: &trend_series,
                        title: "Time constant and resistance of each track",
                    },
                    fmt,
                )?,
            )?;
        }
        if !arrhenius.is_empty() {
            set.add(
                format!("arrhenius.{ext}"),
                plot::render_arrhenius(
                    &plot::ArrheniusFigure {
                        tracks: &arrhenius,
                        title: "Arrhenius plot of each track",
                    },
                    fmt,
                )?,
            )?;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_order_by_their_numbers() {
        let mut v = vec![
            "cycle-10.csv",
            "cycle-9.csv",
            "cycle-100.csv",
            "cycle-1.csv",
        ];
        v.sort_by(|a, b| natural_cmp(a, b));
        assert_eq!(
            v,
            [
                "cycle-1.csv",
                "cycle-9.csv",
                "cycle-10.csv",
                "cycle-100.csv"
            ]
        );
        let mut t = vec!["T700C.csv", "T650.5C.csv", "T1000C.csv"];
        t.sort_by(|a, b| natural_cmp(a, b));
        assert_eq!(t, ["T650.5C.csv", "T700C.csv", "T1000C.csv"]);
        assert_eq!(last_number(Path::new("d/cell2-cycle-012.csv")), Some(12.0));
        assert_eq!(last_number(Path::new("T650C.csv")), Some(650.0));
        assert_eq!(last_number(Path::new("soc-0.5.csv")), Some(0.5));
        assert_eq!(last_number(Path::new("baseline.csv")), None);
    }

    #[test]
    fn temperature_units() {
        assert_eq!(
            temperature_unit(Some("degC")),
            Some(TemperatureUnit::Celsius)
        );
        assert_eq!(temperature_unit(Some("K")), Some(TemperatureUnit::Kelvin));
        assert_eq!(temperature_unit(Some("cycle")), None);
        assert_eq!(temperature_unit(None), None);
    }
}
