//! Model files and `taumap simulate` end to end: every fault of a model
//! file and of the options is refused (exit 2, `error: FILE:LINE: ...`,
//! nothing written), the messages are those `docs/errors.md` shows, and
//! a simulated file is the model's impedance (or step response) that
//! `taumap invert` (or `taumap transient`) reads back to the model.

use crate::util::{Run, assert_clean_failure, repo_root, taumap, tempdir};
use std::path::Path;
use taumap::circuit::{Element, Series};

/// The section of `docs/errors.md` on model files and `taumap simulate`.
const SECTION: &str = "## Model files (`taumap simulate`)";

/// The first two lines of every faulty model file: a comment and a good
/// element, so that each fault sits on line 3.
const HEAD: &str = "# cell 7, after 50 cycles\nresistor r_inf r=150mohm\n";

/// A good model file.
const GOOD: &str = "\
# cell 7, after 50 cycles
resistor  r_inf    r=150mohm
inductor  leads    l=80nH
zarc      anode    r=80mohm  tau=20us  phi=0.85
zarc      cathode  r=0.12ohm tau=1ms   phi=0.95 fixed
warburg-transmissive diffusion r=50mohm tau=0.5s
";

/// One bad-input class: its name and example as the document shows them,
/// the model file, and the options after `simulate model.txt --out
/// sim.csv`.
struct Case {
    class: &'static str,
    /// Markdown.
    example: String,
    model: Vec<u8>,
    options: &'static [&'static str],
    /// `--out` names a folder that exists (else a file that does not).
    out_folder: bool,
}

/// A model file with `line` as its third line.
fn bad(class: &'static str, line: &'static str) -> Case {
    Case {
        class,
        example: format!("line 3 {}", code(line)),
        model: format!("{HEAD}{line}\n").into_bytes(),
        options: &[],
        out_folder: false,
    }
}

/// A model file of `bytes`.
fn file(class: &'static str, example: &'static str, bytes: Vec<u8>) -> Case {
    Case {
        class,
        example: example.to_string(),
        model: bytes,
        options: &[],
        out_folder: false,
    }
}

/// A good model file run with `options`.
fn option(class: &'static str, options: &'static [&'static str]) -> Case {
    Case {
        class,
        example: code(&options.join(" ")),
        model: GOOD.as_bytes().to_vec(),
        options,
        out_folder: false,
    }
}

/// Every class, in the order of the document.
fn cases() -> Vec<Case> {
    let mut big = HEAD.as_bytes().to_vec();
    big.push(b'#');
    big.extend(std::iter::repeat_n(b'x', 1 << 20));
    big.push(b'\n');
    vec![
        bad(
            "unknown element kind",
            "zark anode r=80mohm tau=20us phi=0.85",
        ),
        bad(
            "unknown parameter",
            "zarc anode r=80mohm tau=20us alpha=0.85",
        ),
        bad("missing parameter", "zarc anode r=80mohm tau=20us"),
        bad(
            "parameter given twice",
            "zarc anode r=80mohm tau=20us r=90mohm phi=0.85",
        ),
        bad("not a number", "zarc anode r=abc tau=20us phi=0.85"),
        bad("decimal comma", "zarc anode r=0,08ohm tau=20us phi=0.85"),
        bad("missing unit", "zarc anode r=80 tau=20us phi=0.85"),
        bad("unknown unit", "zarc anode r=80mOhms tau=20us phi=0.85"),
        bad(
            "unit on an exponent",
            "zarc anode r=80mohm tau=20us phi=0.85deg",
        ),
        bad(
            "negative or zero value",
            "zarc anode r=-80mohm tau=20us phi=0.85",
        ),
        bad(
            "value beyond double precision",
            "zarc anode r=1e400ohm tau=20us phi=0.85",
        ),
        bad(
            "exponent out of (0, 1]",
            "zarc anode r=80mohm tau=20us phi=1.2",
        ),
        bad(
            "`fixed` not after a parameter",
            "zarc anode fixed r=80mohm tau=20us phi=0.85",
        ),
        bad("not NAME=VALUE", "zarc anode r = 80mohm tau=20us phi=0.85"),
        bad(
            "label with other characters",
            "zarc anode/1 r=80mohm tau=20us phi=0.85",
        ),
        bad("duplicate label", "zarc r_inf r=80mohm tau=20us phi=0.85"),
        file(
            "no element",
            "only comments and blank lines, 3 lines",
            b"# cell 7, after 50 cycles\n\n# to do\n".to_vec(),
        ),
        file(
            "not UTF-8",
            "a comment `# 25 \\xb0C` (Latin-1) on line 3",
            [HEAD.as_bytes(), b"# 25 \xb0C\n"].concat(),
        ),
        file("larger than 1 MiB", "a comment of 1 MiB on line 3", big),
        option("`--from-hz` not positive", &["--from-hz", "0"]),
        option(
            "`--to-hz` not above `--from-hz`",
            &["--from-hz", "10", "--to-hz", "1"],
        ),
        option("`--per-decade` out of range", &["--per-decade", "2000"]),
        option(
            "too many points",
            &[
                "--from-hz",
                "1e-90",
                "--to-hz",
                "1e90",
                "--per-decade",
                "1000",
            ],
        ),
        option("`--noise-rel` out of range", &["--noise-rel=-0.01"]),
        option("`--step-current-a` zero", &["--step-current-a", "0"]),
        option(
            "`--to-s` not after `--from-s`",
            &["--step-current-a", "0.1", "--from-s", "1", "--to-s", "1"],
        ),
        Case {
            out_folder: true,
            example: "`--out runs`, an existing folder".into(),
            ..option("`--out` naming a folder", &[])
        },
    ]
}

/// Runs `c` in a fresh folder; checks exit code 2, `error: ` on stderr,
/// no panic, nothing on stdout and nothing written; returns the message.
fn run_case(c: &Case) -> String {
    let dir = tempdir();
    std::fs::write(dir.path().join("model.txt"), &c.model).unwrap();
    let out = if c.out_folder { "runs" } else { "sim.csv" };
    if c.out_folder {
        std::fs::create_dir(dir.path().join(out)).unwrap();
    }
    let mut args = vec!["simulate", "model.txt", "--out", out];
    args.extend_from_slice(c.options);
    let run = taumap(dir.path(), &args);
    let what = format!("class {:?}\n{}", c.class, run.explain());
    if c.out_folder {
        assert_eq!(run.code, 2, "{what}");
        assert_eq!(std::fs::read_dir(dir.path().join(out)).unwrap().count(), 0);
    } else {
        assert_clean_failure(&run, "", dir.path(), out);
    }
    assert!(run.stdout.is_empty(), "{what}");
    let entries = std::fs::read_dir(dir.path()).unwrap().count();
    assert_eq!(
        entries,
        1 + usize::from(c.out_folder),
        "nothing but the model in the folder\n{what}"
    );
    run.stderr
        .strip_prefix("error: ")
        .and_then(|m| m.strip_suffix('\n'))
        .filter(|m| !m.contains('\n'))
        .unwrap_or_else(|| panic!("stderr is one line `error: ...`\n{what}"))
        .to_string()
}

/// `text` as a code span (two backticks when it holds one; CommonMark).
fn code(text: &str) -> String {
    if text.contains('`') {
        format!("`` {text} ``")
    } else {
        format!("`{text}`")
    }
}

/// The list of the section as it should read.
fn render(cases: &[Case], messages: &[String]) -> String {
    let mut out = String::new();
    for (c, m) in cases.iter().zip(messages) {
        out.push_str(&format!("- {}: {}\n  {}\n", c.class, c.example, code(m)));
    }
    out
}

#[test]
fn faulty_model_files_and_options_are_refused_as_the_errors_page_says() {
    let cases = cases();
    let messages: Vec<String> = cases.iter().map(run_case).collect();
    for (c, m) in cases.iter().zip(&messages) {
        if c.options.is_empty() && !c.out_folder {
            // Every fault of the file is on its third line (the size limit
            // is reached there too).
            assert!(m.starts_with("model.txt:3: "), "{}: {m}", c.class);
        } else {
            assert!(!m.starts_with("model.txt"), "{}: {m}", c.class);
        }
    }
    let doc = std::fs::read_to_string(repo_root().join("docs/errors.md")).unwrap();
    let section = doc
        .split_once(SECTION)
        .map(|(_, rest)| rest)
        .unwrap_or_else(|| panic!("docs/errors.md has a section {SECTION:?}"));
    let listed: String = section
        .lines()
        .skip_while(|l| !l.starts_with("- "))
        .take_while(|l| l.starts_with("- ") || l.starts_with("  "))
        .map(|l| format!("{l}\n"))
        .collect();
    let wanted = render(&cases, &messages);
    assert!(
        listed == wanted,
        "the list of {SECTION:?} in docs/errors.md is out of date; it should read:\n\n{wanted}"
    );
}

/// The rows of a CSV file below its header, as numbers.
fn rows(text: &str, header: &str) -> Vec<Vec<f64>> {
    let mut lines = text.lines().skip_while(|l| l.starts_with('#'));
    assert_eq!(lines.next(), Some(header), "{text}");
    lines
        .map(|l| l.split(',').map(|x| x.parse().unwrap()).collect())
        .collect()
}

/// Runs `taumap ARGS` in `dir` and checks that it succeeded.
fn ok(dir: &Path, args: &[&str]) -> Run {
    let run = taumap(dir, args);
    assert_eq!(run.code, 0, "{}", run.explain());
    run
}

/// The model of [`GOOD`], written out here element by element rather
/// than read through the model reader.
fn good_series() -> Series {
    Series(vec![
        Element::Resistor { r_ohm: 0.150 },
        Element::Inductor { l_h: 80e-9 },
        Element::Zarc {
            r_ohm: 0.080,
            tau_s: 20e-6,
            phi: 0.85,
        },
        Element::Zarc {
            r_ohm: 0.12,
            tau_s: 1e-3,
            phi: 0.95,
        },
        Element::WarburgFinite {
            r_ohm: 0.050,
            tau_s: 0.5,
        },
    ])
}

#[test]
fn a_simulated_spectrum_is_the_impedance_of_the_model() {
    let dir = tempdir();
    std::fs::write(dir.path().join("cell.model"), GOOD).unwrap();
    let run = ok(dir.path(), &["simulate", "cell.model", "--out", "cell.csv"]);
    assert_eq!(run.stdout, "wrote 71 frequencies to cell.csv\n");
    let text = std::fs::read_to_string(dir.path().join("cell.csv")).unwrap();
    let table = rows(&text, "frequency_hz,z_re_ohm,z_im_ohm");
    // 0.01 Hz to 100 kHz at 10 per decade.
    assert_eq!(table.len(), 71);
    let series = good_series();
    for (i, r) in table.iter().enumerate() {
        let f = 0.01 * 10f64.powf(i as f64 / 10.0);
        assert!((r[0] - f).abs() <= 1e-9 * f, "row {i}: {r:?}");
        let z = series.impedance(f);
        // Ten significant digits are printed.
        let tol = 1e-9 * z.norm();
        assert!((r[1] - z.re).abs() <= tol, "row {i}: {r:?} vs {z}");
        assert!((r[2] - z.im).abs() <= tol, "row {i}: {r:?} vs {z}");
    }

    // The same through standard output, with the message on stderr.
    let run = ok(dir.path(), &["simulate", "cell.model", "--out", "-"]);
    assert_eq!(run.stdout, text);
    assert_eq!(run.stderr, "wrote 71 frequencies to standard output\n");

    // Options move the grid.
    ok(
        dir.path(),
        &[
            "simulate",
            "cell.model",
            "--out",
            "narrow.csv",
            "--from-hz",
            "1",
            "--to-hz",
            "1e3",
            "--per-decade",
            "5",
        ],
    );
    let narrow = rows(
        &std::fs::read_to_string(dir.path().join("narrow.csv")).unwrap(),
        "frequency_hz,z_re_ohm,z_im_ohm",
    );
    assert_eq!(narrow.len(), 16);
    assert!((narrow[15][0] - 1e3).abs() < 1e-6);
}

#[test]
fn noise_follows_the_seed() {
    let dir = tempdir();
    std::fs::write(dir.path().join("cell.model"), GOOD).unwrap();
    let read = |name: &str| std::fs::read(dir.path().join(name)).unwrap();
    for (name, seed) in [("a.csv", "7"), ("b.csv", "7"), ("c.csv", "8")] {
        ok(
            dir.path(),
            &[
                "simulate",
                "cell.model",
                "--out",
                name,
                "--noise-rel",
                "0.01",
                "--seed",
                seed,
            ],
        );
    }
    assert_eq!(read("a.csv"), read("b.csv"), "same seed, same bytes");
    let values = |name: &str| {
        rows(
            &String::from_utf8(read(name)).unwrap(),
            "frequency_hz,z_re_ohm,z_im_ohm",
        )
    };
    // The values, not only the seed in the header, differ at every point.
    let (noisy, other) = (values("a.csv"), values("c.csv"));
    assert_eq!(noisy.len(), other.len());
    for (a, c) in noisy.iter().zip(&other) {
        assert!(a[0] == c[0] && a[1] != c[1] && a[2] != c[2], "{a:?} {c:?}");
    }
    // The noise has the size asked for: 1 % of |Z| on each part.
    let series = good_series();
    let (mut sum, mut n) = (0.0, 0.0);
    for r in &noisy {
        let z = series.impedance(r[0]);
        sum += ((r[1] - z.re) / z.norm()).powi(2) + ((r[2] - z.im) / z.norm()).powi(2);
        n += 2.0;
    }
    let rms = (sum / n).sqrt();
    // 142 normal deviates: the rms is within 20 % of 0.01 (chi-square with
    // 142 degrees of freedom, far beyond 3 sigma).
    assert!((rms - 0.01).abs() < 0.002, "rms {rms}");
}

/// Two ZARCs two decades apart behind a resistor.
const TWO_ARCS: &str = "\
resistor               r=0.1ohm
zarc      fast         r=0.1ohm  tau=100us  phi=0.9
zarc      slow         r=0.1ohm  tau=10ms   phi=0.9
";

fn summary(run: &Run) -> serde_json::Value {
    serde_json::from_str(&run.stdout).unwrap_or_else(|e| panic!("{e}\n{}", run.explain()))
}

#[test]
fn inverting_a_simulated_spectrum_finds_the_model_peaks() {
    let dir = tempdir();
    std::fs::write(dir.path().join("two.model"), TWO_ARCS).unwrap();
    ok(
        dir.path(),
        &[
            "simulate",
            "two.model",
            "--out",
            "two.csv",
            "--noise-rel",
            "0.002",
        ],
    );
    let run = ok(
        dir.path(),
        &["invert", "two.csv", "--out", "out", "--no-plots", "--json"],
    );
    let j = summary(&run);
    let peaks = j["peaks"].as_array().unwrap();
    assert_eq!(peaks.len(), 2, "{}", run.stdout);
    // A ZARC's DRT is symmetric in ln tau about tau0 (Fuoss & Kirkwood
    // 1941): each peak sits at its tau0, each with R = 0.1 ohm.
    for (p, tau0) in peaks.iter().zip([1e-4, 1e-2]) {
        let tau = p["tau_s"].as_f64().unwrap();
        assert!((tau / tau0).log10().abs() < 0.1, "{tau} vs {tau0}");
        let r = p["r_ohm"].as_f64().unwrap();
        assert!((r - 0.1).abs() < 0.01, "{r}");
    }
    let r_inf = j["r_inf_ohm"].as_f64().unwrap();
    assert!((r_inf - 0.1).abs() < 0.005, "{r_inf}");
}

#[test]
fn a_simulated_step_response_gives_the_total_resistance() {
    let dir = tempdir();
    std::fs::write(dir.path().join("two.model"), TWO_ARCS).unwrap();
    let run = ok(
        dir.path(),
        &[
            "simulate",
            "two.model",
            "--out",
            "step.csv",
            "--step-current-a=-0.2",
            "--noise-rel",
            "0.001",
        ],
    );
    // 10 samples at rest, then 1 us to 100 s at 100 per decade.
    assert_eq!(run.stdout, "wrote 811 samples to step.csv\n");
    let text = std::fs::read_to_string(dir.path().join("step.csv")).unwrap();
    let samples = rows(&text, "time_s,voltage_v");
    assert_eq!(samples.len(), 811);
    assert!(samples[..10].iter().all(|r| r[0] < 0.0));
    // The last sample: -0.2 A through 0.3 ohm, fully relaxed (the slow
    // arc's tail beyond 100 s holds far less than the noise).
    let last = samples[810][1];
    assert!((last + 0.06).abs() < 0.06 * 0.005, "{last}");

    let run = ok(
        dir.path(),
        &[
            "transient",
            "step.csv",
            "--current-step-a=-0.2",
            "--out",
            "out",
            "--no-plots",
            "--json",
        ],
    );
    let j = summary(&run);
    assert_eq!(j["baseline_source"], "pre_step_samples");
    let total = j["r_inf_ohm"].as_f64().unwrap() + j["r_pol_ohm"].as_f64().unwrap();
    assert!(
        (total - 0.3).abs() < 0.3 * 0.02,
        "total {total}\n{}",
        run.stdout
    );
}

#[test]
fn an_existing_output_survives_a_failed_run() {
    let dir = tempdir();
    std::fs::write(dir.path().join("sim.csv"), "earlier\n").unwrap();
    std::fs::write(dir.path().join("bad.model"), "zarc r=1ohm\n").unwrap();
    let run = taumap(dir.path(), &["simulate", "bad.model", "--out", "sim.csv"]);
    assert_eq!(run.code, 2, "{}", run.explain());
    assert!(
        run.stderr
            .starts_with("error: bad.model:1: zarc: missing parameters")
    );
    assert_eq!(
        std::fs::read_to_string(dir.path().join("sim.csv")).unwrap(),
        "earlier\n"
    );
}
