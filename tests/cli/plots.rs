//! Every figure copes with degenerate ranges: the full CLI with plots on, on
//! small inputs written to a temporary directory, under a time limit (a
//! hang fails the test instead of stalling the suite). Each run ends with
//! exit 0 and valid, non-empty SVG and PNG files, or with exit 2, a clear
//! error and no output folder. The exactly fitted resistor (a zero
//! imaginary part) is in `invert.rs`.
//!
//! Also here: every output file is byte-identical across runs and thread
//! counts (deterministic output, see DEVELOPERS.md).

use crate::util::{Run, assert_clean_failure, repo_root, taumap_within, tempdir};
use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::Path;
use std::time::Duration;

/// Generous against a loaded machine: each run takes well under a second,
/// the hang this guards against grew without bound.
const LIMIT: Duration = Duration::from_secs(60);

/// The figures of a spectrum inversion (lambda only when a rule chose it).
const SPECTRUM_FIGURES: [&str; 3] = ["drt", "nyquist", "bode"];
/// The figures of a transient inversion.
const TRANSIENT_FIGURES: [&str; 2] = ["drt", "transient"];

/// 0.1 Hz to 100 kHz at 5 points per decade (31 points).
fn frequencies_hz() -> impl Iterator<Item = f64> {
    (0..=30).map(|k| 10f64.powf(k as f64 / 5.0 - 1.0))
}

fn spectrum_csv(rows: impl Iterator<Item = (f64, f64, f64)>) -> String {
    let mut s = String::from("frequency_hz,z_re_ohm,z_im_ohm\n");
    for (f, re, im) in rows {
        let _ = writeln!(s, "{f:e},{re:e},{im:e}");
    }
    s
}

/// `scale` times (10 ohm + Voigt element R = 50 ohm, tau = 1 ms): Z = R_inf +
/// R/(1 + j w tau) (textbook RC relation).
fn voigt_csv(scale: f64) -> String {
    spectrum_csv(frequencies_hz().map(|f| {
        let x = 2.0 * std::f64::consts::PI * f * 1e-3;
        let d = 1.0 + x * x;
        (f, scale * (10.0 + 50.0 / d), scale * (-50.0 * x / d))
    }))
}

/// The voltage of `scale` times (10 ohm + Voigt(50 ohm, 1 ms)) under a 1 A
/// current step at t = 0, sampled every 10 us for 20 ms after 10 pre-step
/// samples at 0 V: v = I (R_inf + R (1 - exp(-t/tau))) (textbook
/// first-order network).
fn voigt_step_csv(scale: f64) -> String {
    let mut s = String::from("time_s,voltage_v\n");
    for k in -10i32..=2000 {
        let t = k as f64 * 1e-5;
        let v = if k < 0 {
            0.0
        } else {
            scale * (10.0 + 50.0 * (1.0 - (-t / 1e-3).exp()))
        };
        let _ = writeln!(s, "{t:e},{v:e}");
    }
    s
}

/// A voltage that never changes, with `pre_step` samples before t = 0.
fn constant_voltage_csv(v: f64, pre_step: i32) -> String {
    let mut s = String::from("time_s,voltage_v\n");
    for k in -pre_step..=2000 {
        let _ = writeln!(s, "{:e},{v}", k as f64 * 1e-5);
    }
    s
}

fn write(dir: &Path, name: &str, text: &str) {
    std::fs::write(dir.join(name), text).expect("the temporary directory is writable");
}

fn summary(run: &Run, out: &Path) -> serde_json::Value {
    let text = std::fs::read_to_string(out.join("summary.json"))
        .unwrap_or_else(|e| panic!("summary.json: {e}\n{}", run.explain()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("summary.json: {e}\n{}", run.explain()))
}

fn number(json: &serde_json::Value, key: &str) -> f64 {
    json[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} is not a number: {json}"))
}

/// Checks that `needle` is in a warning on stderr and in the `warnings` array
/// of summary.json.
fn assert_warned(run: &Run, json: &serde_json::Value, needle: &str) {
    let listed = json["warnings"]
        .as_array()
        .unwrap_or_else(|| panic!("no warnings array\n{}", run.explain()));
    assert!(
        listed
            .iter()
            .any(|w| w.as_str().is_some_and(|w| w.contains(needle))),
        "wanted {needle:?} in summary.json warnings {listed:?}\n{}",
        run.explain()
    );
    assert!(
        run.stderr
            .lines()
            .any(|l| l.starts_with("warning: ") && l.contains(needle)),
        "wanted {needle:?} on stderr\n{}",
        run.explain()
    );
}

/// The texts of an SVG's `<text>` elements (axis labels, titles, legends).
fn svg_labels(svg: &str) -> Vec<String> {
    svg.split("<text")
        .skip(1)
        .filter_map(|t| {
            let body = &t[t.find('>')? + 1..];
            Some(body[..body.find("</text>")?].trim().to_string())
        })
        .collect()
}

/// Checks that `out/STEM.svg` and `out/STEM.png` exist and are valid: the
/// SVG is one complete `<svg>` element without a NaN or infinite
/// coordinate; the PNG decodes to a non-empty image of more than one colour
/// (a figure, not a blank canvas).
fn assert_figures(run: &Run, out: &Path, stems: &[&str]) {
    for stem in stems {
        let svg_path = out.join(format!("{stem}.svg"));
        let svg = std::fs::read_to_string(&svg_path)
            .unwrap_or_else(|e| panic!("{}: {e}\n{}", svg_path.display(), run.explain()));
        let body = svg.trim_end();
        assert!(
            body.starts_with("<svg") && body.ends_with("</svg>"),
            "{stem}.svg is not one <svg> element\n{}",
            run.explain()
        );
        for bad in ["NaN", "inf"] {
            assert!(!svg.contains(bad), "{bad} in {stem}.svg\n{}", run.explain());
        }
        let png_path = out.join(format!("{stem}.png"));
        let file = std::fs::File::open(&png_path)
            .unwrap_or_else(|e| panic!("{}: {e}\n{}", png_path.display(), run.explain()));
        let mut reader = png::Decoder::new(std::io::BufReader::new(file))
            .read_info()
            .unwrap_or_else(|e| panic!("{stem}.png: {e}\n{}", run.explain()));
        let mut pixels = vec![0; reader.output_buffer_size()];
        let frame = reader
            .next_frame(&mut pixels)
            .unwrap_or_else(|e| panic!("{stem}.png: {e}\n{}", run.explain()));
        assert!(frame.width > 0 && frame.height > 0, "{stem}.png is empty");
        let bytes = &pixels[..frame.buffer_size()];
        let px = frame.color_type.samples() * (frame.bit_depth as usize).div_ceil(8);
        assert!(
            bytes.chunks(px).any(|p| p != &bytes[..px]),
            "{stem}.png is one colour\n{}",
            run.explain()
        );
    }
}

/// A constant modulus: (a) the same complex value at every frequency (a
/// Nyquist plot of one point, flat Bode panels); (b) the all-pass
/// Z = (1 - j w tau)/(1 + j w tau), |Z| = 1 up to rounding while the phase
/// turns by 180 degrees. Neither is the impedance of a passive RC network,
/// so both fit badly and say so. (c) 1 ohm in series with a Voigt element
/// of 1e-12 ohm: |Z| constant to 4e-13 decade (one value on a log axis),
/// a phase of a few 1e-11 degrees; fitted by R_inf = 1 ohm.
#[test]
fn constant_modulus_plots_finish() {
    let dir = tempdir();
    write(
        dir.path(),
        "point.csv",
        &spectrum_csv(frequencies_hz().map(|f| (f, 1.0, -0.5))),
    );
    write(
        dir.path(),
        "allpass.csv",
        &spectrum_csv(frequencies_hz().map(|f| {
            let x = 2.0 * std::f64::consts::PI * f * 1e-3;
            let d = 1.0 + x * x;
            (f, (1.0 - x * x) / d, -2.0 * x / d)
        })),
    );
    for name in ["point", "allpass"] {
        let input = format!("{name}.csv");
        let run = taumap_within(dir.path(), &["invert", &input, "--out", name], LIMIT);
        assert_eq!(run.code, 0, "{}", run.explain());
        let out = dir.path().join(name);
        let json = summary(&run, &out);
        assert_warned(&run, &json, "the fit misses the data by");
        assert_figures(&run, &out, &SPECTRUM_FIGURES);
        assert_figures(&run, &out, &["lambda"]);
    }
    write(
        dir.path(),
        "flat.csv",
        &spectrum_csv(frequencies_hz().map(|f| {
            let x = 2.0 * std::f64::consts::PI * f * 1e-3;
            let d = 1.0 + x * x;
            (f, 1.0 + 1e-12 / d, -1e-12 * x / d)
        })),
    );
    let run = taumap_within(dir.path(), &["invert", "flat.csv", "--out", "flat"], LIMIT);
    assert_eq!(run.code, 0, "{}", run.explain());
    let out = dir.path().join("flat");
    let json = summary(&run, &out);
    assert!(
        (number(&json, "r_inf_ohm") - 1.0).abs() < 1e-9,
        "{}",
        run.explain()
    );
    assert_figures(&run, &out, &SPECTRUM_FIGURES);
    assert_figures(&run, &out, &["lambda"]);
}

/// Checks a run on `scale` times the Voigt cell: exit 0, the analytical
/// resistances times `scale` in summary.json within 2 % (the accuracy tests
/// allow 1 % on spectra; a transient's R_inf is extrapolated to the step
/// from the first sample 10 us after it, 0.7 % low here), valid figures, and axis labels of `figure`
/// carrying the data's exponent (the axes follow the values, not a
/// default range).
fn assert_scaled_voigt(run: &Run, out: &Path, scale: f64, figures: &[&str], exponent: &str) {
    assert_eq!(run.code, 0, "{}", run.explain());
    let json = summary(run, out);
    for (key, want) in [("r_inf_ohm", 10.0 * scale), ("r_pol_ohm", 50.0 * scale)] {
        let got = number(&json, key);
        assert!(
            (got / want - 1.0).abs() < 0.02,
            "{key} {got:e}, want {want:e}\n{}",
            run.explain()
        );
    }
    assert_figures(run, out, figures);
    for stem in figures {
        let svg = std::fs::read_to_string(out.join(format!("{stem}.svg"))).unwrap();
        let labels = svg_labels(&svg);
        assert!(
            labels.iter().any(|l| l.contains(exponent)),
            "no label with {exponent} in {stem}.svg: {labels:?}"
        );
    }
}

/// Runs the Voigt cell at `scale` through `invert` and `transient`.
fn scaled_voigt_runs(scale: f64, exponent: &str) {
    // The spectrum reader's documented range of max |Z|.
    let (lo, hi) = taumap::pipeline::spectrum::Z_RANGE_OHM;
    assert!(lo < 10.0 * scale && 60.0 * scale < hi, "inside the range");
    let dir = tempdir();
    write(dir.path(), "cell.csv", &voigt_csv(scale));
    write(dir.path(), "step.csv", &voigt_step_csv(scale));
    let run = taumap_within(dir.path(), &["invert", "cell.csv", "--out", "s"], LIMIT);
    assert_scaled_voigt(
        &run,
        &dir.path().join("s"),
        scale,
        &["nyquist", "bode"],
        exponent,
    );
    assert_figures(&run, &dir.path().join("s"), &["drt", "lambda"]);
    let run = taumap_within(
        dir.path(),
        &[
            "transient",
            "step.csv",
            "--current-step-a",
            "1",
            "--out",
            "t",
        ],
        LIMIT,
    );
    assert_scaled_voigt(&run, &dir.path().join("t"), scale, &["transient"], exponent);
    assert_figures(&run, &dir.path().join("t"), &["drt", "lambda"]);
}

/// A tiny impedance scale, 1e-150 ohm (inside the readers' range, far below
/// any measurement): the same results times 1e-150, figures labelled in
/// 1e-149 ohm or V.
#[test]
fn tiny_impedance_scale_plots_finish() {
    scaled_voigt_runs(1e-150, "10⁻¹⁴⁹");
}

/// A huge impedance scale, 1e150 ohm.
#[test]
fn huge_impedance_scale_plots_finish() {
    scaled_voigt_runs(1e150, "10¹⁵¹");
}

/// `--lambda 1e300` leaves the distribution empty (every coefficient zero):
/// the DRT figure has a zero range; a warning says so.
#[test]
fn empty_distribution_plots_finish() {
    let dir = tempdir();
    write(dir.path(), "cell.csv", &voigt_csv(1.0));
    write(dir.path(), "step.csv", &voigt_step_csv(1.0));
    let spectrum = ["invert", "cell.csv", "--lambda", "1e300", "--out", "s"];
    let transient = [
        "transient",
        "step.csv",
        "--current-step-a",
        "1",
        "--lambda",
        "1e300",
        "--out",
        "t",
    ];
    for (args, figures) in [
        (&spectrum[..], &SPECTRUM_FIGURES[..]),
        (&transient[..], &TRANSIENT_FIGURES[..]),
    ] {
        let run = taumap_within(dir.path(), args, LIMIT);
        assert_eq!(run.code, 0, "{}", run.explain());
        let out = dir.path().join(args[args.len() - 1]);
        let json = summary(&run, &out);
        assert_warned(&run, &json, "the distribution is empty");
        // Exactly zero: a sum of zero coefficients.
        assert_eq!(number(&json, "r_pol_ohm"), 0.0, "{}", run.explain());
        assert_eq!(json["peaks"].as_array().map(Vec::len), Some(0));
        assert_figures(&run, &out, figures);
        // A fixed lambda: no lambda figure.
        assert!(!out.join("lambda.svg").exists(), "{}", run.explain());
    }
}

/// A transient whose signal never changes.
#[test]
fn constant_transient_signal_plots_finish() {
    let dir = tempdir();
    // Exactly zero change (0 V throughout): refused, nothing written.
    write(dir.path(), "zero.csv", &constant_voltage_csv(0.0, 10));
    let run = taumap_within(
        dir.path(),
        &[
            "transient",
            "zero.csv",
            "--current-step-a",
            "1",
            "--out",
            "z",
        ],
        LIMIT,
    );
    assert_clean_failure(
        &run,
        "zero.csv: the response does not change over the record",
        dir.path(),
        "z",
    );

    // An absolute 1.2 V before and after the step: no change either, but
    // the pre-step mean and the bin means differ from 1.2 V by rounding
    // (~1e-16 V). Refusing it like the 0 V record is the expected outcome;
    // an inversion of the rounding is accepted here only with valid figures
    // and the residual warning, since this test is about the figures.
    write(dir.path(), "rest.csv", &constant_voltage_csv(1.2, 10));
    let run = taumap_within(
        dir.path(),
        &[
            "transient",
            "rest.csv",
            "--current-step-a",
            "1",
            "--out",
            "r",
        ],
        LIMIT,
    );
    match run.code {
        2 => assert_clean_failure(
            &run,
            "rest.csv: the response does not change",
            dir.path(),
            "r",
        ),
        0 => {
            let out = dir.path().join("r");
            assert_warned(&run, &summary(&run, &out), "the fit misses the data by");
            assert_figures(&run, &out, &TRANSIENT_FIGURES);
        }
        _ => panic!("{}", run.explain()),
    }

    // The record starts at the step with an absolute 1.2 V and no baseline:
    // read as an instantaneous step of 1.2 V, all of it R_inf = 1.2 ohm; the
    // distribution is empty (a zero range in the DRT figure).
    write(dir.path(), "start.csv", &constant_voltage_csv(1.2, 0));
    let run = taumap_within(
        dir.path(),
        &[
            "transient",
            "start.csv",
            "--current-step-a",
            "1",
            "--out",
            "s",
        ],
        LIMIT,
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let out = dir.path().join("s");
    let json = summary(&run, &out);
    assert!(
        (number(&json, "r_inf_ohm") - 1.2).abs() < 1e-9,
        "{}",
        run.explain()
    );
    assert_warned(&run, &json, "the distribution is empty");
    assert_figures(&run, &out, &TRANSIENT_FIGURES);
}

/// Runs `taumap ARGS` in `dir` with `RAYON_NUM_THREADS` set to `threads`
/// (removed when `None`), like [`taumap_within`] but with that one variable.
fn taumap_threads(dir: &Path, args: &[&str], threads: Option<&str>) -> Run {
    let mut cmd = std::process::Command::new(env!("CARGO_BIN_EXE_taumap"));
    cmd.args(args).current_dir(dir);
    match threads {
        Some(n) => cmd.env("RAYON_NUM_THREADS", n),
        None => cmd.env_remove("RAYON_NUM_THREADS"),
    };
    let out = cmd.output().expect("the test binary can be started");
    Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
        cmdline: format!("RAYON_NUM_THREADS={threads:?} taumap {}", args.join(" ")),
    }
}

/// Every file under `dir`, by relative path.
fn files(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    let mut all = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for entry in std::fs::read_dir(&d).unwrap() {
            let path = entry.unwrap().path();
            if path.is_dir() {
                stack.push(path);
            } else {
                let name = path.strip_prefix(dir).unwrap().display().to_string();
                all.insert(name, std::fs::read(&path).unwrap());
            }
        }
    }
    all
}

/// Two runs with the default thread count, one with 1 and one with 2
/// threads, each in its own folder with the same relative paths: every
/// output file (figures and summary included, nothing excluded) is
/// byte-identical, for a spectrum and for a transient. Results in input
/// order and a fixed number format make this hold (common practice for
/// reproducible output, see DEVELOPERS.md "Deterministic").
#[test]
fn outputs_are_byte_identical_across_runs_and_thread_counts() {
    let root = repo_root();
    let spectrum = std::fs::read(root.join("demo-data/button-cell-700c.csv")).unwrap();
    let pulse = std::fs::read(root.join("demo-data/button-cell-700c-pulse.csv")).unwrap();
    let runs: Vec<(tempfile::TempDir, BTreeMap<String, Vec<u8>>)> =
        [None, None, Some("1"), Some("2")]
            .into_iter()
            .map(|threads| {
                let dir = tempdir();
                std::fs::write(dir.path().join("cell.csv"), &spectrum).unwrap();
                std::fs::write(dir.path().join("pulse.csv"), &pulse).unwrap();
                for args in [
                    &["invert", "cell.csv", "--out", "out/spectrum"][..],
                    &[
                        "transient",
                        "pulse.csv",
                        "--current-step-a=-0.1",
                        "--out",
                        "out/pulse",
                    ][..],
                ] {
                    let run = taumap_threads(dir.path(), args, threads);
                    assert_eq!(run.code, 0, "{}", run.explain());
                }
                let out = files(&dir.path().join("out"));
                (dir, out)
            })
            .collect();
    let first = &runs[0].1;
    // Every output of both commands: 12 files of a spectrum, 10 of a
    // transient (no Nyquist or Bode figures).
    assert_eq!(first.len(), 22, "{:?}", first.keys().collect::<Vec<_>>());
    for (i, (_, other)) in runs.iter().enumerate().skip(1) {
        assert_eq!(
            first.keys().collect::<Vec<_>>(),
            other.keys().collect::<Vec<_>>(),
            "run {i}: other files"
        );
        for (name, bytes) in first {
            assert!(
                &other[name] == bytes,
                "run {i}: {name} differs ({} vs {} bytes)",
                bytes.len(),
                other[name].len()
            );
        }
    }
}
