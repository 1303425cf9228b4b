//! `docs/errors.md` stays true: every bad-input class it lists is run
//! through the binary, and its table shows, byte for byte, the message the
//! binary prints.
//!
//! The cases below are data: the files a class needs (in a fresh folder,
//! under a relative name, so the message does not depend on where the test
//! runs), the command line, and the class name and example the document
//! shows. One test runs them all and compares the document's tables with
//! what the binary printed; when they differ, it prints the tables as they
//! should read.

use crate::util::{Run, repo_root, taumap, tempdir, voigt_csv};
use std::collections::BTreeSet;
use std::path::Path;

/// Section headings of `docs/errors.md`, in document order.
const READER: &str = "Reading a table (both commands)";
const SPECTRUM: &str = "Spectra (`taumap invert`)";
const TRANSIENT: &str = "Transients (`taumap transient`)";
const OPTIONS: &str = "Options and the output folder";
const GROUPS: [&str; 4] = [READER, SPECTRUM, TRANSIENT, OPTIONS];

/// One bad-input class.
struct Case {
    /// Section of the document.
    group: &'static str,
    /// The class, as the first column of the table names it.
    class: &'static str,
    /// The example input, as the second column shows it (markdown).
    example: &'static str,
    /// Files written into the run's folder before the run; a name ending
    /// in `/` is a folder.
    files: Vec<(&'static str, Vec<u8>)>,
    /// The command line after `taumap`.
    args: &'static [&'static str],
}

fn case(
    group: &'static str,
    class: &'static str,
    example: &'static str,
    args: &'static [&'static str],
) -> Case {
    Case {
        group,
        class,
        example,
        files: Vec::new(),
        args,
    }
}

impl Case {
    fn with(mut self, name: &'static str, bytes: impl Into<Vec<u8>>) -> Self {
        self.files.push((name, bytes.into()));
        self
    }
}

const SPEC: &[&str] = &["invert", "cell.csv"];
const STEP: &[&str] = &["transient", "step.csv", "--current-step-a", "0.1"];
const HEAD: &str = "frequency_hz,z_re_ohm,z_im_ohm\n";
/// Five capacitive points, 1 Hz to 10 kHz.
const ROWS: &str = "1,10,-1\n10,9,-2\n100,8,-3\n1000,7,-2\n10000,6,-1\n";

/// The canonical header and `rows`.
fn spectrum(rows: &str) -> String {
    format!("{HEAD}{rows}")
}

/// Sample times of the test records: 10 per decade from 0.1 ms to 10 s.
fn times_s() -> impl Iterator<Item = f64> {
    (0..=50).map(|i| 1e-4 * 10f64.powf(f64::from(i) / 10.0))
}

/// The voltage after a current step of 0.1 A into 0.1 ohm in series with
/// 1 ohm parallel to a capacitor (tau = 10 ms), from 0 V (analytic).
fn rc_rise_v(t_s: f64) -> f64 {
    0.01 + 0.1 * (1.0 - (-t_s / 0.01).exp())
}

/// A valid record of [`rc_rise_v`] under `header`.
fn step_record(header: &str) -> String {
    let mut s = format!("{header}\n");
    for t_s in times_s() {
        s.push_str(&format!("{t_s:e},{:e}\n", rc_rise_v(t_s)));
    }
    s
}

/// A voltage record with `value(t_s)` at the times of [`times_s`].
fn record_with(value: impl Fn(f64) -> f64) -> String {
    let mut s = String::from("time_s,voltage_v\n");
    for t_s in times_s() {
        s.push_str(&format!("{t_s:e},{}\n", value(t_s)));
    }
    s
}

/// Every class of `docs/errors.md`, in document order within each section.
fn cases() -> Vec<Case> {
    vec![
        // Reading a table: both readers share these (shown for spectra).
        case(
            READER,
            "missing file",
            "`taumap invert absent.csv`, no such file",
            &["invert", "absent.csv"],
        ),
        case(
            READER,
            "input is a folder",
            "`taumap invert data`, a folder",
            &["invert", "data"],
        )
        .with("data/", ""),
        case(READER, "empty file, spectrum", "a file of 0 bytes", SPEC).with("cell.csv", ""),
        case(READER, "empty file, transient", "a file of 0 bytes", STEP).with("step.csv", ""),
        case(
            READER,
            "only comments, spectrum",
            "`# cell 7, 25 °C` and a blank line",
            SPEC,
        )
        .with("cell.csv", "# cell 7, 25 \u{b0}C\n\n"),
        case(
            READER,
            "only comments, transient",
            "`# cell 7, 25 °C` and a blank line",
            STEP,
        )
        .with("step.csv", "# cell 7, 25 \u{b0}C\n\n"),
        case(
            READER,
            "data without a header, spectrum",
            "first line `1,10,-1`",
            SPEC,
        )
        .with("cell.csv", ROWS),
        case(
            READER,
            "data without a header, transient",
            "first line `0.001,0.02`",
            STEP,
        )
        .with("step.csv", "0.001,0.02\n0.002,0.03\n"),
        case(
            READER,
            "free text and no header, spectrum",
            "`Potentiostat export`, `Operator: lab 2`, `Cell: 7`",
            SPEC,
        )
        .with(
            "cell.csv",
            "Potentiostat export\nOperator: lab 2\nCell: 7\n",
        ),
        case(
            READER,
            "free text and no header, transient",
            "`Potentiostat export`, `Operator: lab 2`, `Cell: 7`",
            STEP,
        )
        .with(
            "step.csv",
            "Potentiostat export\nOperator: lab 2\nCell: 7\n",
        ),
        case(
            READER,
            "free text, then data without a header",
            "`Potentiostat export`, `Cell: 7`, then `1,10,-1`",
            SPEC,
        )
        .with("cell.csv", format!("Potentiostat export\nCell: 7\n{ROWS}")),
        case(
            READER,
            "columns separated by spaces",
            "`frequency_hz z_re_ohm z_im_ohm`, then `1 10 -1` and four more rows",
            SPEC,
        )
        .with("cell.csv", format!("{HEAD}{ROWS}").replace(',', " ")),
        case(READER, "too few fields", "row `10,9`", SPEC)
            .with("cell.csv", spectrum("1,10,-1\n10,9\n")),
        case(READER, "too many fields", "row `10,9,-2,4`", SPEC)
            .with("cell.csv", spectrum("1,10,-1\n10,9,-2,4\n")),
        case(READER, "unterminated quote", "row `1,10,\"-1`", SPEC)
            .with("cell.csv", spectrum("1,10,\"-1\n")),
        case(
            READER,
            "text after a closing quote",
            "row `1,\"10\" ohm,-1`",
            SPEC,
        )
        .with("cell.csv", spectrum("1,\"10\" ohm,-1\n")),
        case(READER, "not a number", "row `1,abc,-1`", SPEC)
            .with("cell.csv", spectrum("1,abc,-1\n")),
        case(
            READER,
            "decimal comma in a comma-delimited file",
            "row `1,\"10,5\",-1`",
            SPEC,
        )
        .with("cell.csv", spectrum("1,\"10,5\",-1\n")),
        case(
            READER,
            "both decimal separators",
            "semicolon file, row `1;1.234,5;-1`",
            SPEC,
        )
        .with("cell.csv", "frequency_hz;z_re_ohm;z_im_ohm\n1;1.234,5;-1\n"),
        case(
            READER,
            "value not finite",
            "row `1,inf,-1` (also `NaN`, `1e400`)",
            SPEC,
        )
        .with("cell.csv", spectrum("1,inf,-1\n")),
        case(READER, "missing value", "row `1,,-1`", SPEC).with("cell.csv", spectrum("1,,-1\n")),
        case(
            READER,
            "line longer than 1 MiB",
            "row `1,111…1,-1` of 1,048,581 bytes",
            SPEC,
        )
        .with(
            "cell.csv",
            spectrum(&format!("1,{},-1\n", "1".repeat(1 << 20))),
        ),
        case(
            READER,
            "binary file",
            "the first bytes of a PNG image",
            SPEC,
        )
        .with("cell.csv", b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR".to_vec()),
        // Spectra.
        case(
            SPECTRUM,
            "no frequency column",
            "header `z_re_ohm,z_im_ohm`",
            SPEC,
        )
        .with("cell.csv", "z_re_ohm,z_im_ohm\n10,-1\n"),
        case(
            SPECTRUM,
            "no real-part column",
            "header `frequency_hz,z_im_ohm`",
            SPEC,
        )
        .with("cell.csv", "frequency_hz,z_im_ohm\n1,-1\n"),
        case(
            SPECTRUM,
            "no imaginary-part column",
            "header `frequency_hz,z_re_ohm`",
            SPEC,
        )
        .with("cell.csv", "frequency_hz,z_re_ohm\n1,10\n"),
        case(
            SPECTRUM,
            "modulus without phase",
            "header `frequency_hz,z_mod_ohm`",
            SPEC,
        )
        .with("cell.csv", "frequency_hz,z_mod_ohm\n1,10\n"),
        case(
            SPECTRUM,
            "phase without modulus",
            "header `frequency_hz,z_phase_deg`",
            SPEC,
        )
        .with("cell.csv", "frequency_hz,z_phase_deg\n1,-10\n"),
        case(
            SPECTRUM,
            "header in one field",
            "the line `frequency_hz z_re_ohm z_im_ohm` alone",
            SPEC,
        )
        .with("cell.csv", "frequency_hz z_re_ohm z_im_ohm\n"),
        case(
            SPECTRUM,
            "two columns for one quantity",
            "header `f,freq,z_re_ohm,z_im_ohm`",
            SPEC,
        )
        .with("cell.csv", "f,freq,z_re_ohm,z_im_ohm\n1,1,10,-1\n"),
        case(
            SPECTRUM,
            "unsupported unit in a heading",
            "heading `frequency (GHz)`",
            SPEC,
        )
        .with("cell.csv", "frequency (GHz),z_re_ohm,z_im_ohm\n1,10,-1\n"),
        case(
            SPECTRUM,
            "ambiguous unit (milli or mega)",
            "heading `f (MHZ)`",
            SPEC,
        )
        .with("cell.csv", "f (MHZ),z_re_ohm,z_im_ohm\n1,10,-1\n"),
        case(SPECTRUM, "frequency not positive", "row `0,10,-1`", SPEC)
            .with("cell.csv", spectrum("0,10,-1\n")),
        case(
            SPECTRUM,
            "negative modulus",
            "header `frequency_hz,z_mod_ohm,z_phase_deg`, row `1,-10,-5`",
            SPEC,
        )
        .with("cell.csv", "frequency_hz,z_mod_ohm,z_phase_deg\n1,-10,-5\n"),
        case(
            SPECTRUM,
            "duplicate frequency",
            "10 Hz on lines 3 and 5",
            SPEC,
        )
        .with(
            "cell.csv",
            spectrum("1,10,-1\n10,9,-2\n100,8,-3\n10,7,-2\n10000,6,-1\n"),
        ),
        case(
            SPECTRUM,
            "negated imaginary part with the physical sign",
            "header `frequency_hz,z_re_ohm,-z_im_ohm`, values negative",
            SPEC,
        )
        .with(
            "cell.csv",
            format!("frequency_hz,z_re_ohm,-z_im_ohm\n{ROWS}"),
        ),
        case(
            SPECTRUM,
            "negated phase with the physical sign",
            "header `frequency_hz,z_mod_ohm,-phase`, values negative",
            SPEC,
        )
        .with("cell.csv", format!("frequency_hz,z_mod_ohm,-phase\n{ROWS}")),
        case(SPECTRUM, "too few points", "4 rows", SPEC).with(
            "cell.csv",
            spectrum("1,10,-1\n10,9,-2\n100,8,-3\n1000,7,-2\n"),
        ),
        case(SPECTRUM, "more than 100000 points", "100,001 rows", SPEC).with(
            "cell.csv",
            spectrum(
                &(1..=100_001)
                    .map(|i| format!("{i},1,-1\n"))
                    .collect::<String>(),
            ),
        ),
        case(
            SPECTRUM,
            "value beyond double precision after unit conversion",
            "heading `frequency (kHz)`, row `1e306,10,-1`",
            SPEC,
        )
        .with(
            "cell.csv",
            "frequency (kHz),z_re_ohm,z_im_ohm\n1e306,10,-1\n",
        ),
        case(
            SPECTRUM,
            "impedance too large",
            "`z_re_ohm` 1e201 at every frequency",
            &["invert", "cell.csv", "--no-plots"],
        )
        .with(
            "cell.csv",
            spectrum("1,1e201,-1\n10,1e201,-2\n100,1e201,-3\n1000,1e201,-2\n10000,1e201,-1\n"),
        ),
        case(
            SPECTRUM,
            "impedance too small",
            "`z_re_ohm` 1e-201 at every frequency, `z_im_ohm` 0",
            &["invert", "cell.csv", "--no-plots"],
        )
        .with(
            "cell.csv",
            spectrum("1,1e-201,0\n10,1e-201,0\n100,1e-201,0\n1000,1e-201,0\n10000,1e-201,0\n"),
        ),
        case(
            SPECTRUM,
            "impedance zero everywhere",
            "`0,0` at every frequency",
            &["invert", "cell.csv", "--no-plots"],
        )
        .with(
            "cell.csv",
            spectrum("1,0,0\n10,0,0\n100,0,0\n1000,0,0\n10000,0,0\n"),
        ),
        // Transients.
        case(
            TRANSIENT,
            "no time column",
            "header `seconds,voltage_v`",
            STEP,
        )
        .with("step.csv", "seconds,voltage_v\n0.001,0.02\n"),
        case(
            TRANSIENT,
            "no voltage column",
            "header `time_s,temp_c`",
            STEP,
        )
        .with("step.csv", "time_s,temp_c\n0.001,25\n"),
        case(
            TRANSIENT,
            "current record with a current step",
            "header `time_s,current_a`, `--current-step-a 0.1`",
            STEP,
        )
        .with("step.csv", "time_s,current_a\n0.001,0.02\n"),
        case(
            TRANSIENT,
            "voltage record with a voltage step",
            "header `time_s,voltage_v`, `--voltage-step-v 0.1`",
            &["transient", "step.csv", "--voltage-step-v", "0.1"],
        )
        .with("step.csv", "time_s,voltage_v\n0.001,0.02\n"),
        case(
            TRANSIENT,
            "two time columns",
            "header `time_s,t,voltage_v`",
            STEP,
        )
        .with("step.csv", "time_s,t,voltage_v\n0.001,0.001,0.02\n"),
        case(
            TRANSIENT,
            "unsupported time unit",
            "heading `time (d)`",
            STEP,
        )
        .with("step.csv", "time (d),voltage_v\n0.001,0.02\n"),
        case(
            TRANSIENT,
            "times not increasing",
            "`0.002` on line 3 after `0.002` on line 2",
            STEP,
        )
        .with("step.csv", "time_s,voltage_v\n0.002,0.02\n0.002,0.03\n"),
        case(
            TRANSIENT,
            "time beyond double precision after unit conversion",
            "heading `time (h)`, row `1e305,0.02`",
            STEP,
        )
        .with("step.csv", "time (h),voltage_v\n1e305,0.02\n"),
        case(
            TRANSIENT,
            "too few samples after the step",
            "three rows",
            STEP,
        )
        .with(
            "step.csv",
            "time_s,voltage_v\n0.001,0.02\n0.01,0.03\n0.1,0.04\n",
        ),
        case(
            TRANSIENT,
            "clock not starting at the step",
            "1000 samples from 1000 s to 1009.99 s",
            STEP,
        )
        .with(
            "step.csv",
            format!(
                "time_s,voltage_v\n{}",
                (0..1000)
                    .map(|i| format!(
                        "{:.2},{}\n",
                        1000.0 + f64::from(i) * 0.01,
                        1.0 + f64::from(i) * 1e-4
                    ))
                    .collect::<String>()
            ),
        ),
        case(
            TRANSIENT,
            "only samples before the step",
            "rows at t = -0.1 s and t = 0",
            STEP,
        )
        .with("step.csv", "time_s,voltage_v\n-0.1,0.01\n0,0.01\n"),
        case(
            TRANSIENT,
            "fit start beyond the record",
            "a record to 10 s, `--fit-start 100`",
            &[
                "transient",
                "step.csv",
                "--current-step-a",
                "0.1",
                "--fit-start",
                "100",
            ],
        )
        .with("step.csv", step_record("time_s,voltage_v")),
        case(
            TRANSIENT,
            "change below double precision",
            "1.5 V changing by about 1e-14 V, `--baseline 1.5`",
            &[
                "transient",
                "step.csv",
                "--current-step-a",
                "0.1",
                "--baseline",
                "1.5",
                "--no-plots",
            ],
        )
        .with("step.csv", record_with(|t_s| 1.5 + 1e-13 * rc_rise_v(t_s))),
        case(
            TRANSIENT,
            "no change at all",
            "1.5 V at every time, `--baseline 1.5`",
            &[
                "transient",
                "step.csv",
                "--current-step-a",
                "0.1",
                "--baseline",
                "1.5",
                "--no-plots",
            ],
        )
        .with("step.csv", record_with(|_| 1.5)),
        // Options and the output folder.
        case(
            OPTIONS,
            "`--lambda` not a rule or a number",
            "`--lambda fast`",
            &["invert", "cell.csv", "--lambda", "fast"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--lambda` not positive",
            "`--lambda -1`",
            &["invert", "cell.csv", "--lambda", "-1"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--per-decade` out of range",
            "`--per-decade 500`",
            &["invert", "cell.csv", "--per-decade", "500"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--penalty-order` out of range",
            "`--penalty-order 3`",
            &["invert", "cell.csv", "--penalty-order", "3"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "penalty order 2 with hat functions",
            "`--basis hat --penalty-order 2`",
            &[
                "invert",
                "cell.csv",
                "--basis",
                "hat",
                "--penalty-order",
                "2",
            ],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--tau-min` not positive",
            "`--tau-min 0`",
            &["invert", "cell.csv", "--tau-min", "0"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--tau-max` not above `--tau-min`",
            "`--tau-min 1 --tau-max 0.1`",
            &["invert", "cell.csv", "--tau-min", "1", "--tau-max", "0.1"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--tau-min` above the default upper end",
            "`--tau-min 1e6` on a spectrum from 0.1 Hz",
            &["invert", "cell.csv", "--tau-min", "1e6"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "tau grid too long",
            "`--tau-min 1e-30 --tau-max 1e30 --per-decade 100`",
            &[
                "invert",
                "cell.csv",
                "--tau-min",
                "1e-30",
                "--tau-max",
                "1e30",
                "--per-decade",
                "100",
            ],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--bins-per-decade` out of range",
            "`--bins-per-decade 1`",
            &[
                "transient",
                "step.csv",
                "--current-step-a",
                "0.1",
                "--bins-per-decade",
                "1",
            ],
        )
        .with("step.csv", step_record("time_s,voltage_v")),
        case(
            OPTIONS,
            "`--fit-start` negative",
            "`--fit-start=-1`",
            &[
                "transient",
                "step.csv",
                "--current-step-a",
                "0.1",
                "--fit-start=-1",
            ],
        )
        .with("step.csv", step_record("time_s,voltage_v")),
        case(
            OPTIONS,
            "`--fit-end` not after `--fit-start`",
            "`--fit-start 1 --fit-end 0.5`",
            &[
                "transient",
                "step.csv",
                "--current-step-a",
                "0.1",
                "--fit-start",
                "1",
                "--fit-end",
                "0.5",
            ],
        )
        .with("step.csv", step_record("time_s,voltage_v")),
        case(
            OPTIONS,
            "`--f-min` not positive",
            "`--f-min 0`",
            &["invert", "cell.csv", "--f-min", "0"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--f-max` below `--f-min`",
            "`--f-min 100 --f-max 10`",
            &["invert", "cell.csv", "--f-min", "100", "--f-max", "10"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--f-min`/`--f-max` leave too few points",
            "`--f-min 5e4` on a spectrum up to 100 kHz",
            &["invert", "cell.csv", "--f-min", "5e4"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--step-time` not finite",
            "`--step-time inf`",
            &[
                "transient",
                "step.csv",
                "--current-step-a",
                "0.1",
                "--step-time",
                "inf",
            ],
        )
        .with("step.csv", step_record("time_s,voltage_v")),
        case(
            OPTIONS,
            "`--baseline` not finite",
            "`--baseline nan`",
            &[
                "transient",
                "step.csv",
                "--current-step-a",
                "0.1",
                "--baseline",
                "nan",
            ],
        )
        .with("step.csv", step_record("time_s,voltage_v")),
        case(
            OPTIONS,
            "zero step amplitude",
            "`--current-step-a 0`",
            &["transient", "step.csv", "--current-step-a", "0"],
        )
        .with("step.csv", step_record("time_s,voltage_v")),
        case(
            OPTIONS,
            "series capacitance without a current step",
            "`--voltage-step-v 0.1 --series-capacitance`",
            &[
                "transient",
                "step.csv",
                "--voltage-step-v",
                "0.1",
                "--series-capacitance",
            ],
        )
        .with("step.csv", step_record("time_s,current_a")),
        case(
            OPTIONS,
            "`--column` without a role",
            "`--column frequency`",
            &["invert", "cell.csv", "--column", "frequency"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--column` role unknown, spectrum",
            "`--column temperature=#4`",
            &["invert", "cell.csv", "--column", "temperature=#4"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--column` role unknown, transient",
            "`--column phase=#2`",
            &[
                "transient",
                "step.csv",
                "--current-step-a",
                "0.1",
                "--column",
                "phase=#2",
            ],
        )
        .with("step.csv", step_record("time_s,voltage_v")),
        case(
            OPTIONS,
            "`--column` role given twice",
            "`--column real=#2 --column real=#3`",
            &[
                "invert", "cell.csv", "--column", "real=#2", "--column", "real=#3",
            ],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--column` #0",
            "`--column frequency=#0`",
            &["invert", "cell.csv", "--column", "frequency=#0"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--column` number too large",
            "`--column frequency=#9` on a 3-column file",
            &["invert", "cell.csv", "--column", "frequency=#9"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--column` no such heading",
            "`--column frequency=Freq/Hz`",
            &["invert", "cell.csv", "--column", "frequency=Freq/Hz"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--column` heading of two columns",
            "`--column real=Re` with header `frequency_hz,Re,Re,z_im_ohm`",
            &["invert", "cell.csv", "--column", "real=Re"],
        )
        .with("cell.csv", "frequency_hz,Re,Re,z_im_ohm\n1,10,10,-1\n"),
        case(
            OPTIONS,
            "`--unit` without a role",
            "`--unit kHz`",
            &["invert", "cell.csv", "--unit", "kHz"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--unit` role unknown",
            "`--unit freq=kHz`",
            &["invert", "cell.csv", "--unit", "freq=kHz"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "`--unit` unsupported",
            "`--unit frequency=GHz`",
            &["invert", "cell.csv", "--unit", "frequency=GHz"],
        )
        .with("cell.csv", voigt_csv()),
        case(
            OPTIONS,
            "standard input without `--out`",
            "`taumap invert -`",
            &["invert", "-"],
        ),
        case(
            OPTIONS,
            "`--out` naming a file, spectrum",
            "`--out notes.txt`, an existing file",
            &["invert", "cell.csv", "--no-plots", "--out", "notes.txt"],
        )
        .with("cell.csv", voigt_csv())
        .with("notes.txt", "lab notes\n"),
        case(
            OPTIONS,
            "`--out` naming a file, transient",
            "`--out notes.txt`, an existing file",
            &[
                "transient",
                "step.csv",
                "--current-step-a",
                "0.1",
                "--no-plots",
                "--out",
                "notes.txt",
            ],
        )
        .with("step.csv", step_record("time_s,voltage_v"))
        .with("notes.txt", "lab notes\n"),
        case(
            OPTIONS,
            "`--out` inside a file",
            "`--out notes.txt/run1`",
            &[
                "transient",
                "step.csv",
                "--current-step-a",
                "0.1",
                "--no-plots",
                "--out",
                "notes.txt/run1",
            ],
        )
        .with("step.csv", step_record("time_s,voltage_v"))
        .with("notes.txt", "lab notes\n"),
        case(
            SPECTRUM,
            "too few points for the Kramers-Kronig test",
            "`taumap kk` on 5 rows",
            &["kk", "cell.csv"],
        )
        .with("cell.csv", spectrum(ROWS)),
        case(
            OPTIONS,
            "`--noise-rel` not positive",
            "`taumap kk --noise-rel 0`",
            &["kk", "cell.csv", "--noise-rel", "0"],
        )
        .with("cell.csv", voigt_csv()),
    ]
}

/// Every file and folder under `dir`, relative to it.
fn listing(dir: &Path) -> BTreeSet<String> {
    let mut out = BTreeSet::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for entry in std::fs::read_dir(&d).unwrap() {
            let path = entry.unwrap().path();
            out.insert(path.strip_prefix(dir).unwrap().display().to_string());
            if path.is_dir() {
                stack.push(path);
            }
        }
    }
    out
}

/// Runs `c` in a fresh folder; checks exit code 2, nothing on stdout,
/// nothing written, and one line `error: MESSAGE` on stderr; returns the
/// message.
fn run_case(c: &Case) -> String {
    let dir = tempdir();
    for (name, bytes) in &c.files {
        match name.strip_suffix('/') {
            Some(folder) => std::fs::create_dir(dir.path().join(folder)).unwrap(),
            None => std::fs::write(dir.path().join(name), bytes).unwrap(),
        }
    }
    let before = listing(dir.path());
    let run: Run = taumap(dir.path(), c.args);
    let what = format!("class {:?}\n{}", c.class, run.explain());
    assert_eq!(run.code, 2, "{what}");
    assert!(run.stdout.is_empty(), "nothing on stdout\n{what}");
    assert_eq!(listing(dir.path()), before, "nothing written\n{what}");
    let message = run
        .stderr
        .strip_prefix("error: ")
        .and_then(|m| m.strip_suffix('\n'))
        .filter(|m| !m.contains('\n'))
        .unwrap_or_else(|| panic!("stderr is one line `error: ...`\n{what}"));
    message.to_string()
}

/// `text` in a table cell: a `|` is escaped.
fn cell(text: &str) -> String {
    text.replace('|', "\\|")
}

/// `message` as a code span in a table cell; a message that holds a
/// backtick is delimited by two, with a space inside (CommonMark).
fn code_cell(message: &str) -> String {
    if message.contains('`') {
        format!("`` {} ``", cell(message))
    } else {
        format!("`{}`", cell(message))
    }
}

/// The sections and tables `docs/errors.md` should hold.
fn render(cases: &[Case], messages: &[String]) -> String {
    let mut out = String::new();
    for group in GROUPS {
        out.push_str(&format!(
            "## {group}\n\n| class | example input | message |\n|---|---|---|\n"
        ));
        for (c, m) in cases.iter().zip(messages).filter(|(c, _)| c.group == group) {
            out.push_str(&format!(
                "| {} | {} | {} |\n",
                cell(c.class),
                cell(c.example),
                code_cell(m)
            ));
        }
        out.push('\n');
    }
    out
}

/// The cells of a table row, `\|` read as `|`.
fn split_row(line: &str) -> Vec<String> {
    let inner = line.trim().trim_start_matches('|').trim_end_matches('|');
    let mut cells = vec![String::new()];
    let mut chars = inner.chars().peekable();
    while let Some(c) = chars.next() {
        match c {
            '\\' if chars.peek() == Some(&'|') => {
                chars.next();
                cells.last_mut().unwrap().push('|');
            }
            '|' => cells.push(String::new()),
            c => cells.last_mut().unwrap().push(c),
        }
    }
    cells.iter().map(|c| c.trim().to_string()).collect()
}

/// The text of a code-span cell, or `None` when the cell is not one.
fn code_text(cell: &str) -> Option<&str> {
    if let Some(inner) = cell.strip_prefix("``").and_then(|c| c.strip_suffix("``")) {
        return inner.strip_prefix(' ')?.strip_suffix(' ');
    }
    cell.strip_prefix('`')?.strip_suffix('`')
}

/// `(section, class, example, message)` of every data row of the tables
/// in `doc`, in document order.
fn doc_rows(doc: &str) -> Vec<[String; 4]> {
    let mut section = String::new();
    let mut rows = Vec::new();
    for line in doc.lines() {
        if let Some(h) = line.strip_prefix("## ") {
            section = h.trim().to_string();
            continue;
        }
        if !line.starts_with('|') || line.starts_with("|---") || line.starts_with("| class |") {
            continue;
        }
        let cells = split_row(line);
        assert_eq!(cells.len(), 3, "docs/errors.md: a row of 3 cells: {line}");
        let message = code_text(&cells[2])
            .unwrap_or_else(|| panic!("docs/errors.md: message in backticks: {line}"));
        rows.push([
            section.clone(),
            cells[0].clone(),
            cells[1].clone(),
            message.to_string(),
        ]);
    }
    rows
}

#[test]
fn errors_doc_lists_every_class_with_the_message_printed() {
    let cases = cases();
    let classes: BTreeSet<&str> = cases.iter().map(|c| c.class).collect();
    assert_eq!(classes.len(), cases.len(), "class names are unique");
    assert!(cases.iter().all(|c| GROUPS.contains(&c.group)));

    let messages: Vec<String> = cases.iter().map(run_case).collect();

    let doc = std::fs::read_to_string(repo_root().join("docs/errors.md")).unwrap();
    let found = doc_rows(&doc);
    let wanted: Vec<[String; 4]> = GROUPS
        .iter()
        .flat_map(|g| {
            cases
                .iter()
                .zip(&messages)
                .filter(move |(c, _)| c.group == *g)
                .map(|(c, m)| {
                    [
                        c.group.to_string(),
                        c.class.to_string(),
                        c.example.to_string(),
                        m.clone(),
                    ]
                })
        })
        .collect();
    if found != wanted {
        let first = found
            .iter()
            .zip(&wanted)
            .position(|(f, w)| f != w)
            .unwrap_or(found.len().min(wanted.len()));
        panic!(
            "docs/errors.md is out of date: {} rows in the document, {} classes; first \
             difference at row {}:\n  document: {:?}\n  binary:   {:?}\n\
             The tables should read:\n\n{}",
            found.len(),
            wanted.len(),
            first + 1,
            found.get(first),
            wanted.get(first),
            render(&cases, &messages)
        );
    }
}
