//! Reader for step transients, streamed into log-spaced time bins.
//!
//! A transient file is a delimited table (layout as in [`crate::io::table`])
//! with a time column and one measured column:
//!
//! | quantity | names | units accepted |
//! |---|---|---|
//! | time | `time_s`, `time`, `t`, `t_s` | s, ms, us (µs), ns, min, h |
//! | voltage | `voltage_v`, `voltage`, `v`, `u`, `v_v`, `ewe`, `potential`, `potential_v` | V, mV, uV |
//! | current | `current_a`, `current`, `i`, `i_a` | A, mA, uA (µA), nA |
//!
//! Other columns are ignored. Times must increase strictly from row to row
//! (any spacing: linear, logarithmic, irregular). Samples at `t < 0` are the
//! pre-step state and are averaged into the baseline; a sample at exactly
//! `t = 0` belongs to neither side of the step and is skipped; samples at
//! `t > 0` are the response.
//!
//! # Reduction
//! The response is accumulated, while the file is read, into log-spaced time
//! bins ([`crate::pipeline::binning`]), so memory follows the number of
//! decades, not the number of samples.

use std::fs::File;
use std::io::{BufRead, BufReader};
use std::path::Path;

use crate::error::{Error, Result};
use crate::io::columns::{
    AMPERE, BaseUnit, ColumnMap, HOUR, MINUTE, SECOND, UnitReading, VOLT, unit_examples,
    unit_factor,
};
use crate::io::table::{TableHead, TableReader, excerpt, split_unit};
use crate::pipeline::binning::{Accumulator, BinOptions, BinnedTransient, MIN_BINS};

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
const TIME_UNITS: &[BaseUnit] = &[SECOND, MINUTE, HOUR];
const VOLTAGE_UNITS: &[BaseUnit] = &[VOLT];
const CURRENT_UNITS: &[BaseUnit] = &[AMPERE];

/// Opens and streams a transient file; see [`parse_transient`].
pub fn read_transient(
    path: &Path,
    quantity: Quantity,
    opts: &BinOptions,
) -> Result<BinnedTransient> {
    read_transient_with(path, quantity, opts, &ColumnMap::default())
}

/// Opens and streams a transient file with the user's choice of columns
/// and units; see [`parse_transient_with`]. The path `-` reads standard
/// input.
pub fn read_transient_with(
    path: &Path,
    quantity: Quantity,
    opts: &BinOptions,
    map: &ColumnMap,
) -> Result<BinnedTransient> {
    if path == Path::new("-") {
        let stdin = std::io::stdin();
        return parse_transient_with(stdin.lock(), Path::new("<stdin>"), quantity, opts, map);
    }
    let file = File::open(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })?;
    parse_transient_with(BufReader::new(file), path, quantity, opts, map)
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
    parse_transient_with(reader, path, quantity, opts, &ColumnMap::default())
}

/// Like [`parse_transient`], with the user's choice of columns and units
/// (roles `time`, `voltage`, `current`) taking precedence over recognition
/// by name. The header is the first line naming a time column and a
/// voltage or current column; free text above it is skipped.
pub fn parse_transient_with<R: BufRead>(
    reader: R,
    path: &Path,
    quantity: Quantity,
    opts: &BinOptions,
    map: &ColumnMap,
) -> Result<BinnedTransient> {
    let example = quantity.canonical_header();
    let (names, units, what): (&[&str], &[BaseUnit], &str) = match quantity {
        Quantity::Voltage => (VOLTAGE_NAMES, VOLTAGE_UNITS, "voltage"),
        Quantity::Current => (CURRENT_NAMES, CURRENT_UNITS, "current"),
    };
    map.check_roles(&["time", what])?;
    let found = TableReader::find_header(reader, path, example, |head| {
        let has = |role, aliases, bases| {
            candidates(head, map, role, aliases, bases).is_ok_and(|c| !c.is_empty())
        };
        // The other quantity's column also marks the header, so that the
        // message can say which option the file needs.
        has("time", TIME_NAMES, TIME_UNITS)
            && (has(what, names, units)
                || has("", VOLTAGE_NAMES, VOLTAGE_UNITS)
                || has("", CURRENT_NAMES, CURRENT_UNITS))
    })?;
    let mut table = match found {
        Ok(table) => table,
        Err(no) => {
            // One line examined: say which column it lacks.
            if no.single_candidate() {
                choose_columns(&no.first, quantity, map)?;
            }
            return Err(no.error(&format!("time and {what} columns"), example));
        }
    };
    let (cols, scale) = choose_columns(&table, quantity, map)?;

    let mut acc = Accumulator::new(opts)?;
    let mut prev: Option<(f64, usize)> = None;
    while let Some(row) = table.next_row()? {
        let t = table.converted(&row, cols[0], scale[0])?;
        let v = table.converted(&row, cols[1], scale[1])?;
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
                 found {} sample(s) in {} bin(s){}",
                opts.fit_start_s,
                binned.response_samples,
                binned.bins.len(),
                // Many samples in few log bins: the record spans little of a
                // decade after the step, as when the clock started long
                // before it.
                if binned.response_samples >= 10 * MIN_BINS
                    && binned.first_time_s > 0.0
                    && binned.last_time_s < 10.0 * binned.first_time_s
                {
                    format!(
                        " (the first sample after the step is at {} s and the last at {} s: if the \
                         logger's clock did not start at the step, give the step's time on that \
                         clock with --step-time)",
                        binned.first_time_s, binned.last_time_s
                    )
                } else {
                    String::new()
                }
            ),
        ));
    }
    Ok(binned)
}

/// The columns of `head` that may hold `role`: the user's choice, or the
/// headings named by `aliases`. A heading whose unit is not one of `bases`
/// (`T/°C` beside `t/min`: a temperature, not a time) does not name the
/// role while another heading does; alone, it stays, to be reported with
/// its unit.
fn candidates(
    head: &TableHead,
    map: &ColumnMap,
    role: &str,
    aliases: &[&str],
    bases: &[BaseUnit],
) -> Result<Vec<usize>> {
    if let Some(c) = map.column(head, role)? {
        return Ok(vec![c]);
    }
    let all = head.find_columns(aliases);
    let fitting: Vec<usize> = all
        .iter()
        .copied()
        .filter(|&c| match split_unit(head.column_name(c)).1 {
            Some(unit) => unit_factor(&unit, bases) != UnitReading::Unknown,
            None => true,
        })
        .collect();
    Ok(if fitting.is_empty() { all } else { fitting })
}

/// The time and value columns of `head` and the factors from their units
/// to s and V (or A).
fn choose_columns(
    head: &TableHead,
    quantity: Quantity,
    map: &ColumnMap,
) -> Result<([usize; 2], [f64; 2])> {
    let table = head;
    let example = quantity.canonical_header();
    if table.looks_like_data() {
        return Err(table.error(
            table.header_line,
            format!(
                "\"{}\" looks like data, not a header (add a header line such as \"{example}\")",
                excerpt(&table.header_text)
            ),
        ));
    }
    let (names, units, what): (&[&str], &[BaseUnit], &str) = match quantity {
        Quantity::Voltage => (VOLTAGE_NAMES, VOLTAGE_UNITS, "voltage"),
        Quantity::Current => (CURRENT_NAMES, CURRENT_UNITS, "current"),
    };
    let header_err = |t: &TableHead, msg: String| t.error(t.header_line, msg);
    let mut cols = [0usize; 2];
    let mut scale = [1.0f64; 2];
    for (k, (aliases, allowed, label)) in [(TIME_NAMES, TIME_UNITS, "time"), (names, units, what)]
        .into_iter()
        .enumerate()
    {
        let found = candidates(table, map, label, aliases, allowed)?;
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
                    table,
                    format!(
                        "no {label} column found in header \"{}\" (expected e.g. \"{example}\"; \
                         or choose it with --column {label}=HEADING){other}",
                        excerpt(&table.header_text)
                    ),
                ));
            }
            [a, b, ..] => {
                return Err(header_err(
                    table,
                    format!(
                        "columns \"{}\" and \"{}\" both name the {label} (remove or rename one \
                         of them, or choose one with --column {label}=HEADING)",
                        table.column_name(a),
                        table.column_name(b)
                    ),
                ));
            }
        };
        let name = table.column_name(col);
        let given = map.unit(label);
        let source = if given.is_some() {
            format!("--unit {label}")
        } else {
            format!("column \"{name}\"")
        };
        if let Some(unit) = given.map(str::to_string).or_else(|| split_unit(name).1) {
            scale[k] = match unit_factor(&unit, allowed) {
                UnitReading::Factor(f) => f,
                _ if given.is_some() => {
                    return Err(Error::Config(format!(
                        "--unit {label}={unit}: not a unit of the {label} (use one of {})",
                        unit_examples(allowed)
                    )));
                }
                UnitReading::Ambiguous | UnitReading::Unknown => {
                    return Err(header_err(
                        table,
                        format!(
                            "unsupported unit \"{unit}\" in {source} (use one of {}; or give \
                             --unit {label}=UNIT)",
                            unit_examples(allowed)
                        ),
                    ));
                }
            };
        }
        cols[k] = col;
    }
    if cols[0] == cols[1] {
        return Err(table.error(
            table.header_line,
            format!(
                "--column time and --column {what} both choose column #{} (\"{}\")",
                cols[0] + 1,
                table.column_name(cols[0])
            ),
        ));
    }

    Ok((cols, scale))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pipeline::binning::LogBinner;

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
            "pulse.csv:1: no voltage column found in header \"time_s,current_a\" (expected e.g. \"time_s,voltage_v\"; \
             or choose it with --column voltage=HEADING) (this file holds a current: use --voltage-step-v for a potential step)"
        );
        assert_eq!(
            err("time (d),voltage_v\n1,2\n", Quantity::Voltage),
            "pulse.csv:1: unsupported unit \"d\" in column \"time (d)\" (use one of s, ms, us, ns, \
             min, h; or give --unit time=UNIT)"
        );
        assert_eq!(
            err("time_s,U (MV)\n1,2\n", Quantity::Voltage),
            "pulse.csv:1: unsupported unit \"MV\" in column \"U (MV)\" (use one of V, mV, uV; \
             or give --unit voltage=UNIT)"
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
            "pulse.csv:1: columns \"v\" and \"voltage\" both name the voltage (remove or rename one \
             of them, or choose one with --column voltage=HEADING)"
        );
    }

    #[test]
    fn logger_exports_with_units_commas_and_free_text() {
        // The same record in s and V, and in min and mV with decimal
        // commas under a block of free text, bins alike.
        let mut plain = String::from("time_s,voltage_v\n");
        let mut logger = String::from("Cell 7, channel 3\nStarted: 09:14\ntime/min;U/mV\n");
        for k in 1..=400 {
            let t = 0.01 * f64::from(k);
            let v = 3.6 + 0.01 * (1.0 - (-t).exp());
            plain.push_str(&format!("{t},{v}\n"));
            let line = format!("{};{}\n", t / 60.0, v * 1e3).replace('.', ",");
            logger.push_str(&line);
        }
        let a = parse(&plain, Quantity::Voltage).unwrap();
        let b = parse(&logger, Quantity::Voltage).unwrap();
        assert_eq!(a.bins.len(), b.bins.len());
        for (x, y) in a.bins.iter().zip(&b.bins) {
            assert_eq!(x.count, y.count);
            assert!(
                (x.time_s - y.time_s).abs() <= 1e-9 * x.time_s,
                "{x:?} {y:?}"
            );
            assert!((x.value - y.value).abs() <= 1e-9, "{x:?} {y:?}");
        }
        // Columns chosen by the user where the names say nothing.
        let odd = plain.replacen("time_s,voltage_v", "elapsed,cell", 1);
        assert!(err(&odd, Quantity::Voltage).contains("no time column"));
        let mut map = ColumnMap::default();
        map.add_column("time=elapsed").unwrap();
        map.add_column("voltage=#2").unwrap();
        let opts = BinOptions {
            bins_per_decade: 10.0,
            ..BinOptions::default()
        };
        let c = parse_transient_with(
            odd.as_bytes(),
            Path::new("pulse.csv"),
            Quantity::Voltage,
            &opts,
            &map,
        )
        .unwrap();
        assert_eq!(c.bins.len(), a.bins.len());
        assert_eq!(c.bins[3].value, a.bins[3].value);
    }

    /// A temperature column `T/°C` is not a time column beside `t/min`;
    /// alone, it is reported with its unit.
    #[test]
    fn a_heading_with_a_foreign_unit_does_not_name_the_quantity() {
        let mut text = String::from("t/min;U/mV;T/\u{b0}C\n");
        for k in 1..=400 {
            let t = 0.01 * f64::from(k) / 60.0;
            text.push_str(&format!("{t};{};25\n", 3600.0 + f64::from(k)));
        }
        let rec = parse(&text, Quantity::Voltage).unwrap();
        assert_eq!(rec.response_samples, 400);
        let alone = text.replacen("t/min;", "n;", 1);
        assert!(
            err(&alone, Quantity::Voltage).starts_with("pulse.csv:1: unsupported unit \"\u{b0}C\""),
            "{}",
            err(&alone, Quantity::Voltage)
        );
    }
}
