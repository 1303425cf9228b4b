//! The binary on real files: outputs present, JSON keys, CSV headers.

use crate::util::{assert_clean_failure, repo_root, taumap, taumap_within, tempdir, voigt_csv};

#[test]
fn demo_data_inverts_with_every_output() {
    let dir = tempdir();
    let input = repo_root().join("demo-data/button-cell-700c.csv");
    let out = dir.path().join("out");
    let run = taumap(
        dir.path(),
        &[
            "invert",
            input.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    for name in [
        "drt.csv",
        "fit.csv",
        "lambda.csv",
        "summary.json",
        "drt.svg",
        "drt.png",
        "nyquist.svg",
        "nyquist.png",
        "bode.svg",
        "bode.png",
        "lambda.svg",
        "lambda.png",
    ] {
        let p = out.join(name);
        assert!(p.exists(), "missing {name}\n{}", run.explain());
        assert!(
            std::fs::metadata(&p).unwrap().len() > 100,
            "{name} is too small"
        );
    }
    let png = std::fs::read(out.join("drt.png")).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
    let drt = std::fs::read_to_string(out.join("drt.csv")).unwrap();
    assert!(drt.starts_with("tau_s,gamma_ohm,gamma_lo_ohm,gamma_hi_ohm\n"));
    let fit = std::fs::read_to_string(out.join("fit.csv")).unwrap();
    assert!(fit.starts_with(
        "frequency_hz,z_re_ohm,z_im_ohm,fit_re_ohm,fit_im_ohm,residual_re_rel,residual_im_rel\n"
    ));
    let lam = std::fs::read_to_string(out.join("lambda.csv")).unwrap();
    assert!(lam.starts_with("lambda,residual_sq,penalty_sq,dof,gcv_score,lcurve_curvature,discrepancy_ratio,recv_score\n"));

    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    for key in [
        "r_inf_ohm",
        "r_pol_ohm",
        "inductance_h",
        "lambda",
        "lambda_rule",
        "lambda_floored",
        "lambda_grid_edge",
        "lambda_candidates",
        "residual_rms_rel",
        "peaks",
        "solver_status",
        "solver",
        "warnings",
    ] {
        assert!(json.get(key).is_some(), "summary.json lacks {key}");
    }
    assert_eq!(json["solver_status"], "converged");
    assert_eq!(json["solver"]["status"], "converged");
    assert!(json["lambda_grid_edge"].is_null());
    assert_eq!(json["warnings"].as_array().unwrap().len(), 0);
    // The demo cell (src/cli/demo.rs): R_inf 0.150 ohm, L 80 nH, R_pol 0.250 ohm.
    let r_inf = json["r_inf_ohm"].as_f64().unwrap();
    let r_pol = json["r_pol_ohm"].as_f64().unwrap();
    let l = json["inductance_h"].as_f64().unwrap();
    assert!((r_inf - 0.150).abs() < 0.005, "r_inf {r_inf}");
    assert!((r_pol - 0.250).abs() < 0.0075, "r_pol {r_pol}");
    assert!((l / 8e-8 - 1.0).abs() < 0.05, "inductance {l}");
    let peaks = json["peaks"].as_array().unwrap();
    assert!(peaks.len() >= 3, "{peaks:?}");
    let taus: Vec<f64> = peaks.iter().map(|p| p["tau_s"].as_f64().unwrap()).collect();
    assert!(taus.windows(2).all(|w| w[0] < w[1]), "ascending tau");
    for p in peaks {
        for k in ["tau_s", "frequency_hz", "r_ohm", "gamma_ohm"] {
            assert!(p[k].as_f64().is_some(), "peak lacks {k}");
        }
    }
}

#[test]
fn json_flag_prints_the_summary_and_default_dir_is_beside_input() {
    let dir = tempdir();
    std::fs::write(dir.path().join("rc.csv"), voigt_csv()).unwrap();
    let run = taumap(dir.path(), &["invert", "rc.csv", "--json", "--no-plots"]);
    assert_eq!(run.code, 0, "{}", run.explain());
    let json: serde_json::Value = serde_json::from_str(&run.stdout).expect("stdout is JSON");
    let file: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("rc-taumap/summary.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(json, file);
    // Voigt element R = 50 ohm, tau = 1 ms (analytic): one peak.
    let peaks = json["peaks"].as_array().unwrap();
    assert_eq!(peaks.len(), 1, "{}", run.stdout);
    assert!((peaks[0]["tau_s"].as_f64().unwrap().log10() + 3.0).abs() < 0.05);
    assert!((json["r_pol_ohm"].as_f64().unwrap() - 50.0).abs() < 0.5);
    assert!(json["inductance_h"].is_null());
}

#[test]
fn fixed_lambda_and_options_are_honoured() {
    let dir = tempdir();
    std::fs::write(dir.path().join("rc.csv"), voigt_csv()).unwrap();
    let run = taumap(
        dir.path(),
        &[
            "invert",
            "rc.csv",
            "--lambda",
            "1e-4",
            "--basis",
            "hat",
            "--penalty-order",
            "0",
            "--per-decade",
            "8",
            "--json",
            "--no-plots",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let json: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(json["lambda"].as_f64().unwrap(), 1e-4);
    assert_eq!(json["lambda_rule"], "fixed");
    assert_eq!(json["settings"]["basis"], "hat");
    assert!(!dir.path().join("rc-taumap/lambda.csv").exists());
    assert!((json["r_pol_ohm"].as_f64().unwrap() - 50.0).abs() < 1.0);
}

#[test]
fn demo_command_writes_data_and_plots() {
    let dir = tempdir();
    let run = taumap(dir.path(), &["demo"]);
    assert_eq!(run.code, 0, "{}", run.explain());
    assert!(run.stdout.contains("drt.png"), "{}", run.explain());
    let written =
        std::fs::read_to_string(dir.path().join("demo-data/button-cell-700c.csv")).unwrap();
    let shipped =
        std::fs::read_to_string(repo_root().join("demo-data/button-cell-700c.csv")).unwrap();
    assert_eq!(
        written, shipped,
        "checked-in demo data matches the generator"
    );
    let written =
        std::fs::read_to_string(dir.path().join("demo-data/button-cell-700c-pulse.csv")).unwrap();
    let shipped =
        std::fs::read_to_string(repo_root().join("demo-data/button-cell-700c-pulse.csv")).unwrap();
    assert_eq!(
        written, shipped,
        "checked-in pulse test matches the generator"
    );
    assert!(run.stdout.contains("transient.png"), "{}", run.explain());
    assert!(
        dir.path()
            .join("demo-data/button-cell-700c-taumap/summary.json")
            .exists()
    );
    // The thermal-cycling series: 21 files as shipped, and its tracks.
    for k in 0..=20 {
        let name = format!("demo-data/thermal-cycles/cycle-{k:02}.csv");
        let written = std::fs::read_to_string(dir.path().join(&name)).unwrap();
        let shipped = std::fs::read_to_string(repo_root().join(&name)).unwrap();
        assert_eq!(written, shipped, "{name} matches the generator");
    }
    let track = dir.path().join("demo-data/thermal-cycles-track");
    assert!(track.join("heatmap.png").exists());
    let s: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(track.join("summary.json")).unwrap())
            .unwrap();
    assert_eq!(s["inverted"], 21);
    // The cathode (1 ms, 0.120 ohm) grows 50 % in R and 60 % in tau over
    // the 20 cycles (the generator's truth).
    let cathode = s["tracks"]
        .as_array()
        .unwrap()
        .iter()
        .find(|t| (t["tau_first_s"].as_f64().unwrap().log10() + 3.0).abs() < 0.1)
        .expect("a track starts at the cathode's 1 ms");
    assert!(
        (cathode["r_change_rel"].as_f64().unwrap() - 0.5).abs() < 0.05,
        "{cathode}"
    );
    assert!(
        (cathode["tau_change_rel"].as_f64().unwrap() - 0.6).abs() < 0.1,
        "{cathode}"
    );
}

/// `--no-cv-curve` leaves out the re-im cross-validation curve (two lambda
/// sweeps) and its candidate; the chosen lambda does not change.
#[test]
fn no_cv_curve_skips_the_cross_validation_curve_only() {
    let dir = tempdir();
    let input = repo_root().join("demo-data/button-cell-700c.csv");
    let mut lambdas = Vec::new();
    for (sub, extra) in [("all", None), ("quick", Some("--no-cv-curve"))] {
        let out = dir.path().join(sub);
        let mut args = vec![
            "invert",
            input.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--no-plots",
        ];
        args.extend(extra);
        let run = taumap(dir.path(), &args);
        assert_eq!(run.code, 0, "{}", run.explain());
        let lam = std::fs::read_to_string(out.join("lambda.csv")).unwrap();
        let header = lam.lines().next().unwrap();
        assert_eq!(header.ends_with(",recv_score"), extra.is_none(), "{header}");
        let json: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap())
                .unwrap();
        let n_candidates = json["lambda_candidates"].as_array().unwrap().len();
        assert_eq!(n_candidates, if extra.is_none() { 4 } else { 3 });
        lambdas.push(json["lambda"].as_f64().unwrap());
    }
    assert_eq!(lambdas[0].to_bits(), lambdas[1].to_bits());
}

/// A 5-point spectrum no passive DRT model describes: the rule runs to the
/// top of its grid, and the summary and stderr say so.
#[test]
fn lambda_on_the_grid_edge_is_flagged() {
    let dir = tempdir();
    std::fs::write(
        dir.path().join("odd.csv"),
        "frequency_hz,z_re_ohm,z_im_ohm\n1,10,-5\n10,3,8\n100,12,-2\n1000,1,6\n10000,9,-4\n",
    )
    .unwrap();
    let run = taumap(dir.path(), &["invert", "odd.csv", "--json", "--no-plots"]);
    assert_eq!(run.code, 0, "{}", run.explain());
    let json: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(json["lambda_grid_edge"], "upper", "{}", run.explain());
    let warnings = json["warnings"].as_array().unwrap();
    assert!(
        warnings
            .iter()
            .any(|w| w.as_str().unwrap().contains("largest value of its grid")),
        "{}",
        run.explain()
    );
    assert!(
        run.stderr
            .contains("warning: odd.csv: the discrepancy rule chose lambda"),
        "{}",
        run.explain()
    );
}

/// A precision resistor that the model fits exactly (Z = 1 + 0j ohm at every
/// frequency, as an export that rounds Z'' to zero gives): every plot copes
/// with the constant modulus fitted to 1 + 2e-16 ohm. The log axis of that
/// range once looped forever and grew without bound in memory.
#[test]
fn exact_resistor_plots_finish() {
    let dir = tempdir();
    let mut csv = String::from("frequency_hz,z_re_ohm,z_im_ohm\n");
    for k in 0..31 {
        csv.push_str(&format!("{:e},1,0\n", 10f64.powf(k as f64 / 5.0 - 1.0)));
    }
    std::fs::write(dir.path().join("r1.csv"), csv).unwrap();
    let run = taumap_within(
        dir.path(),
        &["invert", "r1.csv", "--out", "out"],
        std::time::Duration::from_secs(60),
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    for name in ["drt.png", "nyquist.svg", "bode.png", "lambda.svg"] {
        assert!(dir.path().join("out").join(name).exists(), "{name}");
    }
    let json: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("out/summary.json")).unwrap(),
    )
    .unwrap();
    assert!((json["r_inf_ohm"].as_f64().unwrap() - 1.0).abs() < 1e-9);
    assert!(json["r_pol_ohm"].as_f64().unwrap().abs() < 1e-9);
}

/// A second run into the same folder leaves only its own results: no plots
/// of the first spectrum beside the summary of the second, no old
/// lambda.csv after a fixed-lambda run, no Nyquist or Bode plot after a
/// transient; a file of the user's stays.
#[test]
fn second_run_into_one_folder_leaves_no_mixed_outputs() {
    let dir = tempdir();
    let spectrum = repo_root().join("demo-data/button-cell-700c.csv");
    let pulse = repo_root().join("demo-data/button-cell-700c-pulse.csv");
    let out = dir.path().join("out");
    let o = out.to_str().unwrap();
    let run = taumap(
        dir.path(),
        &["invert", spectrum.to_str().unwrap(), "--out", o],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    assert!(out.join("bode.png").exists() && out.join("lambda.csv").exists());
    std::fs::write(out.join("notes.txt"), "kept").unwrap();
    let run = taumap(
        dir.path(),
        &[
            "invert",
            spectrum.to_str().unwrap(),
            "--out",
            o,
            "--lambda",
            "1e-3",
            "--no-plots",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    for gone in [
        "lambda.csv",
        "drt.png",
        "bode.svg",
        "nyquist.png",
        "lambda.svg",
    ] {
        assert!(!out.join(gone).exists(), "{gone} left from the first run");
    }
    assert!(out.join("drt.csv").exists() && out.join("summary.json").exists());
    let run = taumap(
        dir.path(),
        &[
            "transient",
            pulse.to_str().unwrap(),
            "--current-step-a",
            "-0.1",
            "--out",
            o,
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    assert!(out.join("transient.png").exists());
    for gone in ["nyquist.svg", "bode.png"] {
        assert!(!out.join(gone).exists(), "{gone} left beside a transient");
    }
    let fit = std::fs::read_to_string(out.join("fit.csv")).unwrap();
    assert!(fit.starts_with("time_s,"), "fit.csv is the transient's");
    assert_eq!(
        std::fs::read_to_string(out.join("notes.txt")).unwrap(),
        "kept"
    );
}

/// The sequence of the bad-input issue: invert, then transient, then invert
/// with `--no-plots` into one folder; after each run the folder holds
/// exactly that run's files (and a file of the user's), nothing else.
#[test]
fn each_run_leaves_exactly_its_own_files() {
    let dir = tempdir();
    let spectrum = repo_root().join("demo-data/button-cell-700c.csv");
    let pulse = repo_root().join("demo-data/button-cell-700c-pulse.csv");
    let out = dir.path().join("out");
    let o = out.to_str().unwrap();
    let listing = || {
        let mut names: Vec<String> = std::fs::read_dir(&out)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        names
    };
    let plots = |stems: &[&str]| -> Vec<String> {
        stems
            .iter()
            .flat_map(|s| [format!("{s}.png"), format!("{s}.svg")])
            .collect()
    };
    let expect = |mut names: Vec<String>| {
        names.push("notes.txt".into());
        names.sort();
        names
    };
    std::fs::create_dir_all(&out).unwrap();
    std::fs::write(out.join("notes.txt"), "kept").unwrap();

    let run = taumap(
        dir.path(),
        &["invert", spectrum.to_str().unwrap(), "--out", o],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let mut want: Vec<String> = ["drt.csv", "fit.csv", "lambda.csv", "summary.json"]
        .map(String::from)
        .to_vec();
    want.extend(plots(&["drt", "lambda", "nyquist", "bode"]));
    assert_eq!(listing(), expect(want));

    let run = taumap(
        dir.path(),
        &[
            "transient",
            pulse.to_str().unwrap(),
            "--current-step-a",
            "-0.1",
            "--out",
            o,
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let mut want: Vec<String> = ["drt.csv", "fit.csv", "lambda.csv", "summary.json"]
        .map(String::from)
        .to_vec();
    want.extend(plots(&["drt", "lambda", "transient"]));
    assert_eq!(listing(), expect(want));

    let run = taumap(
        dir.path(),
        &[
            "invert",
            spectrum.to_str().unwrap(),
            "--out",
            o,
            "--no-plots",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let want: Vec<String> = ["drt.csv", "fit.csv", "lambda.csv", "summary.json"]
        .map(String::from)
        .to_vec();
    assert_eq!(listing(), expect(want));
}

/// Implausible settings and data are said, not printed as numbers: a lambda
/// so large that the distribution is empty and the fit misses by 70 %, a
/// negative lambda, magnitudes no scaling can handle.
#[test]
fn implausible_results_and_values_are_named() {
    let dir = tempdir();
    let demo = repo_root().join("demo-data/button-cell-700c.csv");
    let d = demo.to_str().unwrap();
    let run = taumap(
        dir.path(),
        &[
            "invert",
            d,
            "--lambda",
            "1e300",
            "--json",
            "--no-plots",
            "--out",
            "o",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let json: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    let warnings: Vec<&str> = json["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap())
        .collect();
    assert!(
        warnings.iter().any(|w| w.contains("distribution is empty")),
        "{warnings:?}"
    );
    assert!(
        warnings.iter().any(|w| w.contains("misses the data by")),
        "{warnings:?}"
    );
    assert_eq!(run.stderr.matches("warning: ").count(), warnings.len());

    let run = taumap(dir.path(), &["invert", d, "--lambda", "-1", "--out", "neg"]);
    assert_clean_failure(&run, "a positive number, got \"-1\"", dir.path(), "neg");

    let mut csv = String::from("frequency_hz,z_re_ohm,z_im_ohm\n");
    for k in 0..20 {
        csv.push_str(&format!("{:e},1e-310,-1e-311\n", 10f64.powi(k - 5)));
    }
    std::fs::write(dir.path().join("tiny.csv"), csv).unwrap();
    let run = taumap(dir.path(), &["invert", "tiny.csv", "--out", "tiny"]);
    assert_clean_failure(&run, "tiny.csv: the largest |Z| is", dir.path(), "tiny");
    assert!(!run.stderr.contains("NaN"), "{}", run.explain());
}

/// Writes `name` in `dir` with one `frequency_hz,z_re_ohm,z_im_ohm` row per
/// frequency from 0.01 Hz to 1 MHz (10 per decade), the impedance given by
/// `z(f) -> (re, im)`.
fn write_spectrum(dir: &std::path::Path, name: &str, z: impl Fn(f64) -> (f64, f64)) {
    let mut s = String::from("frequency_hz,z_re_ohm,z_im_ohm\n");
    for i in 0..=80 {
        let f = 1e-2 * 10f64.powf(i as f64 / 10.0);
        let (re, im) = z(f);
        s.push_str(&format!("{f},{re},{im}\n"));
    }
    std::fs::write(dir.join(name), s).unwrap();
}

/// Runs `taumap invert NAME --json --no-plots ARGS` and returns the run and
/// the warnings of its summary.json.
fn invert_json(
    dir: &std::path::Path,
    name: &str,
    args: &[&str],
) -> (crate::util::Run, Vec<String>) {
    let mut all = vec!["invert", name, "--json", "--no-plots"];
    all.extend_from_slice(args);
    let run = taumap(dir, &all);
    assert_eq!(run.code, 0, "{}", run.explain());
    let json: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    let warnings = json["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap().to_string())
        .collect();
    (run, warnings)
}

/// Negative real parts (no passive cell has them) are warned about with
/// their count and the lowest frequency affected, on stderr and in
/// summary.json; the inversion still runs.
#[test]
fn negative_real_parts_are_warned() {
    let dir = tempdir();
    let mut csv = String::new();
    for (i, line) in voigt_csv().lines().enumerate() {
        // Rows 1 and 2: 0.1 Hz and 0.126 Hz, Re Z = 10 + 50/(1 + (2 pi f 1e-3)^2).
        if i == 1 || i == 2 {
            let mut f: Vec<&str> = line.split(',').collect();
            let neg = format!("-{}", f[1]);
            f[1] = &neg;
            csv.push_str(&f.join(","));
        } else {
            csv.push_str(line);
        }
        csv.push('\n');
    }
    std::fs::write(dir.path().join("neg.csv"), csv).unwrap();
    let (run, warnings) = invert_json(dir.path(), "neg.csv", &[]);
    let want = "z_re_ohm is negative at 2 of 61 frequencies (the lowest at 1.0000e-1 Hz: \
                -6.0000e1 ohm): a passive cell has Re Z >= 0";
    assert!(warnings[0].starts_with(want), "{}", run.explain());
    assert!(
        run.stderr.starts_with(&format!("warning: neg.csv: {want}")),
        "{}",
        run.explain()
    );
}

/// A blocking electrode (10 ohm + Voigt(50 ohm, 1 ms) + 10 mF in series)
/// measured down to 0.01 Hz: with the series capacitance switched off the
/// distribution piles up beyond 1/(2 pi f_min), said on stderr and in
/// summary.json with the option that fixes it; with it on, or automatic
/// (the default, which finds it and says so), nothing is warned.
#[test]
fn a_distribution_beyond_the_band_is_warned_with_a_hint() {
    let dir = tempdir();
    write_spectrum(dir.path(), "block.csv", |f| {
        let w = 2.0 * std::f64::consts::PI * f;
        let x = w * 1e-3;
        (
            10.0 + 50.0 / (1.0 + x * x),
            -50.0 * x / (1.0 + x * x) - 1.0 / (w * 1e-2),
        )
    });
    let (run, warnings) = invert_json(dir.path(), "block.csv", &["--series-capacitance=off"]);
    let edge: Vec<&String> = warnings
        .iter()
        .filter(|w| {
            w.contains("% of the distribution's area lies at time constants above 1.592e1 s")
        })
        .collect();
    assert_eq!(edge.len(), 1, "{}", run.explain());
    assert!(
        edge[0].ends_with("fit a series capacitance with --series-capacitance"),
        "{}",
        edge[0]
    );
    assert!(
        run.stderr
            .lines()
            .any(|l| l == format!("warning: block.csv: {}", edge[0])),
        "{}",
        run.explain()
    );
    let (run, warnings) = invert_json(dir.path(), "block.csv", &["--series-capacitance"]);
    assert!(warnings.is_empty(), "{}", run.explain());
    assert!(run.stderr.is_empty(), "{}", run.explain());
    let (run, warnings) = invert_json(dir.path(), "block.csv", &[]);
    assert!(warnings.is_empty(), "{}", run.explain());
    assert!(
        run.stderr.starts_with(
            "note: block.csv: the fit needs a series capacitance (a capacitive low-frequency \
             branch): C = 1.000e-2 F, kept by the significance test"
        ),
        "{}",
        run.explain()
    );
    let json: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    let c = json["series_capacitance_f"].as_f64().unwrap();
    assert!((c / 1e-2 - 1.0).abs() < 0.01, "{c}");
}

/// `--f-min`/`--f-max` fit only the band between them: the summary counts
/// the points fitted, stderr says so, and a band with fewer than 5 points
/// is refused naming the file.
#[test]
fn frequency_band_limits_the_fitted_points() {
    let dir = tempdir();
    std::fs::write(dir.path().join("cell.csv"), crate::util::voigt_csv()).unwrap();
    let (run, _) = invert_json(dir.path(), "cell.csv", &["--f-max", "1000"]);
    let json: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    // 0.1 Hz to 1 kHz at 10 per decade: 41 of the 61 points.
    assert_eq!(json["n_points"].as_u64(), Some(41), "{}", run.explain());
    assert!(
        run.stderr
            .contains("note: cell.csv: fitting 41 of 61 points, 1.0000e-1 to 1.0000e3 Hz"),
        "{}",
        run.explain()
    );
    assert!(
        (json["r_inf_ohm"].as_f64().unwrap() - 10.0).abs() < 0.2,
        "{}",
        run.stdout
    );
    let run = taumap(
        dir.path(),
        &["invert", "cell.csv", "--out", "o", "--f-min", "5e4"],
    );
    assert_clean_failure(
        &run,
        "error: cell.csv: --f-min/--f-max keep 4 of 61 points; at least 5 are needed",
        dir.path(),
        "o",
    );
}

/// Exact (noise-free) data give the GCV rule no minimum: its choice runs
/// off the bottom of the lambda grid and the floor decides. That is said on
/// stderr as a note (not a warning: it is the designed response) and in
/// summary.json; the discrepancy rule, which keeps an interior choice on
/// the same data, says nothing.
#[test]
fn a_floor_that_decides_lambda_is_said() {
    let dir = tempdir();
    // 10 ohm + ZARC(50 ohm, 1 ms, phi 0.9): Z = R0 + R / (1 + (j w tau)^phi)
    // (K. S. Cole and R. H. Cole, J. Chem. Phys. 9, 341, 1941), 81 points.
    let mut csv = String::from("frequency_hz,z_re_ohm,z_im_ohm\n");
    for k in 0..=80 {
        let f = 10f64.powf(-2.0 + k as f64 / 10.0);
        let x = (2.0 * std::f64::consts::PI * f * 1e-3).powf(0.9);
        let (c, s) = (
            (0.45 * std::f64::consts::PI).cos(),
            (0.45 * std::f64::consts::PI).sin(),
        );
        // 1 + x (cos + j sin) in the denominator.
        let (dr, di) = (1.0 + x * c, x * s);
        let d2 = dr * dr + di * di;
        csv.push_str(&format!(
            "{f},{},{}\n",
            10.0 + 50.0 * dr / d2,
            -50.0 * di / d2
        ));
    }
    let input = dir.path().join("zarc.csv");
    std::fs::write(&input, csv).unwrap();
    for (rule, floored) in [("gcv", true), ("discrepancy", false)] {
        let out = dir.path().join(rule);
        let run = taumap(
            dir.path(),
            &[
                "invert",
                input.to_str().unwrap(),
                "--lambda",
                rule,
                "--no-plots",
                "--out",
                out.to_str().unwrap(),
            ],
        );
        assert_eq!(run.code, 0, "{}", run.explain());
        let summary: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap())
                .unwrap();
        assert_eq!(summary["lambda_floored"], floored, "{rule}: {summary}");
        assert_eq!(
            run.stderr.contains("raised to the floor 1e-6"),
            floored,
            "{rule}: {}",
            run.explain()
        );
    }
}

/// The penalty used is in summary.json: `settings.penalty` and, for the
/// adaptive one (the default), how many weighted solves it took and how
/// settled the last one was; `--penalty global` leaves those null.
#[test]
fn the_penalty_and_its_refinement_are_reported() {
    let dir = tempdir();
    let input = dir.path().join("voigt.csv");
    std::fs::write(&input, voigt_csv()).unwrap();
    for penalty in [None, Some("global"), Some("adaptive")] {
        let out = dir.path().join(penalty.unwrap_or("default"));
        let mut args = vec![
            "invert",
            input.to_str().unwrap(),
            "--no-plots",
            "--out",
            out.to_str().unwrap(),
        ];
        if let Some(p) = penalty {
            args.extend(["--penalty", p]);
        }
        let run = taumap(dir.path(), &args);
        assert_eq!(run.code, 0, "{}", run.explain());
        let j: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap())
                .unwrap();
        let adaptive = penalty != Some("global");
        let want = if adaptive { "adaptive" } else { "global" };
        assert_eq!(j["settings"]["penalty"], want, "{j}");
        let solver = &j["solver"];
        if adaptive {
            let n = solver["adaptive_iterations"].as_u64().unwrap();
            assert!((1..=10).contains(&n), "{solver}");
            let change = solver["adaptive_change_rel"].as_f64().unwrap();
            assert!((0.0..0.5).contains(&change), "{solver}");
        } else {
            assert!(solver["adaptive_iterations"].is_null(), "{solver}");
            assert!(solver["adaptive_change_rel"].is_null(), "{solver}");
        }
    }
}

/// `--bands off` writes the two-column drt.csv of earlier versions and
/// null intervals; `--seed` changes the draws (the peaks' tau intervals)
/// but not the band, which needs none.
#[test]
fn bands_off_and_seed() {
    let dir = tempdir();
    let input = repo_root().join("demo-data/button-cell-700c.csv");
    let run_with = |name: &str, extra: &[&str]| {
        let out = dir.path().join(name);
        let mut args = vec![
            "invert",
            input.to_str().unwrap(),
            "--no-plots",
            "--out",
            out.to_str().unwrap(),
        ];
        args.extend(extra);
        let run = taumap(dir.path(), &args);
        assert_eq!(run.code, 0, "{}", run.explain());
        let j: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap())
                .unwrap();
        (std::fs::read_to_string(out.join("drt.csv")).unwrap(), j)
    };
    let (csv, j) = run_with("off", &["--bands", "off"]);
    assert!(csv.starts_with("tau_s,gamma_ohm\n"), "{}", &csv[..40]);
    assert!(j["peaks"][0]["confidence"].is_null(), "{j}");
    assert!(j["processes_supported"].is_null());
    assert_eq!(j["weak_peaks"].as_array().unwrap().len(), 0);
    let (csv1, j1) = run_with("seed1", &[]);
    let (csv2, j2) = run_with("seed2", &["--seed", "2"]);
    assert!(csv1.starts_with("tau_s,gamma_ohm,gamma_lo_ohm,gamma_hi_ohm\n"));
    assert_eq!(csv1, csv2, "the band needs no draws");
    assert_eq!(j1["bands"]["seed"], 1);
    assert_eq!(j2["bands"]["seed"], 2);
    assert_ne!(j1["peaks"][0]["tau_lo_s"], j2["peaks"][0]["tau_lo_s"]);
}
