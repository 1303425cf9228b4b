//! `taumap transient` end to end: the demo pulse test, each kind of step,
//! and bad input (exit 2, `error: FILE:LINE: ...`, nothing written or lost).

use crate::util::{Run, assert_clean_failure, repo_root, taumap, tempdir};
use std::fmt::Write as _;

fn json(run: &Run) -> serde_json::Value {
    serde_json::from_str(&run.stdout).unwrap_or_else(|e| panic!("{e}\n{}", run.explain()))
}

/// A series R-C (R = 50 ohm, C = 20 uF) under a 0.1 V step sampled at
/// 200 kHz for 20 ms: i = (U/R) exp(-t/RC) (textbook first-order network).
fn rc_current_csv() -> String {
    let mut s = String::from("Time (ms),Current (mA)\n");
    for k in -5i32..=4000 {
        let t = k as f64 * 5e-6;
        let i = if k < 0 {
            0.0
        } else {
            0.1 / 50.0 * (-t / 1e-3).exp()
        };
        let _ = writeln!(s, "{},{}", t * 1e3, i * 1e3);
    }
    s
}

/// Relaxation of 5 ohm + Voigt(20 ohm, 2 ms) after 10 mA, v_inf = 1.2 V,
/// with a loaded pre-step voltage of 1.2 + 0.01 * 25 V.
fn relaxation_csv() -> String {
    let mut s = String::from("time_s;voltage_v\n");
    for k in -10i32..=3000 {
        let t = k as f64 * 2e-5;
        let v = if k < 0 {
            1.2 + 0.01 * 25.0
        } else {
            1.2 + 0.01 * 20.0 * (-t / 2e-3).exp()
        };
        let _ = writeln!(s, "{t};{v}");
    }
    s
}

#[test]
fn demo_pulse_inverts_to_the_peaks_of_the_demo_spectrum() {
    let dir = tempdir();
    let root = repo_root();
    let pulse = root.join("demo-data/button-cell-700c-pulse.csv");
    let spectrum = root.join("demo-data/button-cell-700c.csv");
    let out_t = dir.path().join("t");
    let out_s = dir.path().join("s");
    let t = taumap(
        dir.path(),
        &[
            "transient",
            pulse.to_str().unwrap(),
            "--current-step-a=-0.1",
            "--out",
            out_t.to_str().unwrap(),
            "--json",
        ],
    );
    assert_eq!(t.code, 0, "{}", t.explain());
    let s = taumap(
        dir.path(),
        &[
            "invert",
            spectrum.to_str().unwrap(),
            "--out",
            out_s.to_str().unwrap(),
            "--json",
            "--no-plots",
        ],
    );
    assert_eq!(s.code, 0, "{}", s.explain());
    let (jt, js) = (json(&t), json(&s));
    // The demo raises no plausibility warning.
    assert_eq!(jt["warnings"].as_array().map(Vec::len), Some(0));
    assert!(t.stderr.is_empty(), "{}", t.explain());
    assert_eq!(jt["unit"], "ohm");
    assert_eq!(jt["baseline_source"], "pre_step_samples");
    // Transients get the same uncertainty as spectra: every supported peak
    // has its intervals around its value and a confidence of at least the
    // support level, and the counts' probabilities add up to one.
    for j in [&jt, &js] {
        let support = j["bands"]["support"].as_f64().unwrap();
        let peaks = j["peaks"].as_array().unwrap();
        assert_eq!(
            j["processes_supported"].as_u64().unwrap() as usize,
            peaks.len()
        );
        for p in peaks {
            let (t, r) = (p["tau_s"].as_f64().unwrap(), p["r_ohm"].as_f64().unwrap());
            assert!(p["confidence"].as_f64().unwrap() >= support, "{p}");
            assert!(p["tau_lo_s"].as_f64().unwrap() <= t * 1.05, "{p}");
            assert!(p["tau_hi_s"].as_f64().unwrap() >= t / 1.05, "{p}");
            assert!(p["r_lo_ohm"].as_f64().unwrap() <= r && r <= p["r_hi_ohm"].as_f64().unwrap());
        }
        let total: f64 = j["process_count_probability"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c["probability"].as_f64().unwrap())
            .sum();
        assert!((total - 1.0).abs() < 1e-9, "{total}");
        assert!(j["resolution_decades"].as_f64().unwrap() > 0.0);
    }
    let (pt, ps) = (
        jt["peaks"].as_array().unwrap(),
        js["peaks"].as_array().unwrap(),
    );
    let tau = |p: &serde_json::Value| p["tau_s"].as_f64().unwrap();
    let area = |p: &serde_json::Value| p["r_ohm"].as_f64().unwrap();
    let near = |x: f64, y: f64| (x / y).log10().abs() < 0.1;
    // A peak the spectrum does not show may only be the gas diffusion's
    // second and third lines: the finite Warburg element of the demo
    // (tau_W 0.5 s, 0.050 ohm) has lines at tau_W / ((k - 1/2)^2 pi^2),
    // 22.5 ms and 8.1 ms, of 8 R / ((2k - 1)^2 pi^2) = 4.5 and 1.6 mohm
    // (J. R. Macdonald, Impedance Spectroscopy, 1987, for the transmissive
    // finite-length diffusion impedance). Its area belongs to the
    // diffusion's main peak, with which the spectrum merges it.
    let mut extra = 0.0;
    for a in pt {
        if !ps.iter().any(|b| near(tau(a), tau(b))) {
            assert!(
                (5e-3..30e-3).contains(&tau(a)) && area(a) < 0.015,
                "unexpected peak {a}\n{}",
                t.stdout
            );
            extra += area(a);
        }
    }
    // Every peak of the spectrum has its counterpart in the pulse response.
    for b in ps {
        let a = pt.iter().find(|a| near(tau(a), tau(b)));
        let a = a.unwrap_or_else(|| panic!("no peak near {b}\n{}\n{}", t.stdout, s.stdout));
        // Areas depend on where the minima split neighbouring processes.
        let slow = tau(b) > 0.1;
        let (ra, rb) = (area(a) + if slow { extra } else { 0.0 }, area(b));
        assert!((ra / rb - 1.0).abs() < 0.15, "r {ra} vs {rb}");
    }
    for key in ["r_inf_ohm", "r_pol_ohm"] {
        let (a, b) = (jt[key].as_f64().unwrap(), js[key].as_f64().unwrap());
        assert!((a / b - 1.0).abs() < 0.01, "{key}: {a} vs {b}");
    }
    for name in [
        "drt.csv",
        "fit.csv",
        "lambda.csv",
        "summary.json",
        "transient.svg",
        "transient.png",
        "drt.svg",
        "drt.png",
        "lambda.svg",
        "lambda.png",
    ] {
        assert!(out_t.join(name).exists(), "{name} missing");
    }
    let drt = std::fs::read_to_string(out_t.join("drt.csv")).unwrap();
    assert!(drt.starts_with("tau_s,gamma_ohm,gamma_lo_ohm,gamma_hi_ohm\n"));
    let fit = std::fs::read_to_string(out_t.join("fit.csv")).unwrap();
    assert!(fit.starts_with("time_s,measured_v,fitted_v,residual_v,samples\n"));
    let bins = fit.lines().count() - 1;
    assert_eq!(bins as u64, jt["n_bins"].as_u64().unwrap());
}

#[test]
fn voltage_step_reports_an_admittance_distribution() {
    let dir = tempdir();
    std::fs::write(dir.path().join("rc.csv"), rc_current_csv()).unwrap();
    let run = taumap(
        dir.path(),
        &["transient", "rc.csv", "--voltage-step-v", "0.1", "--json"],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let j = json(&run);
    assert_eq!(j["unit"], "siemens");
    assert!(j.get("r_pol_ohm").is_none());
    let peaks = j["peaks"].as_array().unwrap();
    assert_eq!(peaks.len(), 1, "{}", run.stdout);
    assert!((peaks[0]["tau_s"].as_f64().unwrap() / 1e-3).log10().abs() < 0.05);
    assert!((peaks[0]["g_siemens"].as_f64().unwrap() * 50.0 - 1.0).abs() < 0.02);
    assert!(j["g_inf_siemens"].as_f64().unwrap() < 2e-4);
    let out = dir.path().join("rc-taumap");
    let drt = std::fs::read_to_string(out.join("drt.csv")).unwrap();
    assert!(drt.starts_with("tau_s,gamma_siemens,gamma_lo_siemens,gamma_hi_siemens\n"));
    let fit = std::fs::read_to_string(out.join("fit.csv")).unwrap();
    assert!(fit.starts_with("time_s,measured_a,fitted_a,residual_a,samples\n"));
}

#[test]
fn relaxation_reports_final_voltage_and_series_resistance() {
    let dir = tempdir();
    std::fs::write(dir.path().join("relax.csv"), relaxation_csv()).unwrap();
    let run = taumap(
        dir.path(),
        &[
            "transient",
            "relax.csv",
            "--relaxation-current-a",
            "0.01",
            "--no-plots",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    assert!(
        run.stdout.contains("final voltage v_inf = 1.19"),
        "{}",
        run.explain()
    );
    let j: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("relax-taumap/summary.json")).unwrap(),
    )
    .unwrap();
    assert!((j["v_inf_v"].as_f64().unwrap() - 1.2).abs() < 1e-4);
    assert!((j["r_inf_ohm"].as_f64().unwrap() - 5.0).abs() < 0.1);
    assert!((j["r_pol_ohm"].as_f64().unwrap() - 20.0).abs() < 0.2);
    // Without the pre-step samples and without --baseline, R_inf is unknown.
    let post: String = relaxation_csv()
        .lines()
        .filter(|l| !l.starts_with('-'))
        .map(|l| format!("{l}\n"))
        .collect();
    std::fs::write(dir.path().join("post.csv"), post).unwrap();
    let run = taumap(
        dir.path(),
        &[
            "transient",
            "post.csv",
            "--relaxation-current-a=0.01",
            "--json",
            "--no-plots",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let j = json(&run);
    assert!(j["r_inf_ohm"].is_null(), "{}", run.stdout);
    assert_eq!(j["baseline_source"], "none");
    // --baseline supplies it.
    let run = taumap(
        dir.path(),
        &[
            "transient",
            "post.csv",
            "--relaxation-current-a=0.01",
            "--baseline=1.45",
            "--json",
            "--no-plots",
        ],
    );
    let j = json(&run);
    assert_eq!(j["baseline_source"], "given");
    assert!((j["r_inf_ohm"].as_f64().unwrap() - 5.0).abs() < 0.1);
}

/// Writes `text` as `bad.csv`, runs `taumap transient bad.csv ARGS`, and
/// checks what every error must satisfy.
fn expect_error(text: &str, args: &[&str], needle: &str) {
    let dir = tempdir();
    std::fs::write(dir.path().join("bad.csv"), text).unwrap();
    let mut all = vec!["transient", "bad.csv"];
    all.extend_from_slice(args);
    let run = taumap(dir.path(), &all);
    assert_clean_failure(&run, needle, dir.path(), "bad-taumap");
}

#[test]
fn bad_input_is_reported_with_file_and_line() {
    let good = relaxation_csv().replace(';', ",");
    let step = ["--current-step-a", "1"];
    // No step option at all.
    expect_error(&good, &[], "--current-step-a");
    // Two step options.
    expect_error(
        &good,
        &["--current-step-a", "1", "--voltage-step-v", "1"],
        "cannot be used with",
    );
    // Zero amplitude.
    expect_error(&good, &["--current-step-a", "0"], "current-step-a");
    // Wrong quantity for the step.
    expect_error(
        &good,
        &["--voltage-step-v", "0.1"],
        "bad.csv:1: no current column",
    );
    // Time going backwards.
    let mut text = good.clone();
    text.push_str("0.01,1.2\n");
    let line = text.lines().count();
    expect_error(
        &text,
        &step,
        &format!("bad.csv:{line}: time 0.01 does not increase"),
    );
    // A broken number.
    let mut text = good.clone();
    text.push_str("1e3x,1.2\n");
    let line = text.lines().count();
    expect_error(
        &text,
        &step,
        &format!("bad.csv:{line}: cannot read \"1e3x\" as a number (column time_s)"),
    );
    // No samples after the step.
    expect_error(
        "time_s,voltage_v\n-2,1\n-1,1\n",
        &step,
        "bad.csv:1: need samples after the step",
    );
    // A relaxation that does not relax (a constant voltage after a
    // current step is legal: a pure resistance).
    let flat: String = std::iter::once("time_s,voltage_v\n".to_string())
        .chain((1..200).map(|k| format!("{},1.0\n", k as f64 * 1e-4)))
        .collect();
    expect_error(
        &flat,
        &["--relaxation-current-a", "1"],
        "error: bad.csv: the response does not change",
    );
    // A series capacitance on a relaxation.
    expect_error(
        &good,
        &["--relaxation-current-a", "1", "--series-capacitance"],
        "series capacitance",
    );
    // Bad bin count.
    expect_error(
        &good,
        &["--current-step-a", "1", "--bins-per-decade", "1"],
        "bins-per-decade",
    );
}

#[test]
fn wrong_sign_warns_and_fit_start_is_recorded() {
    let dir = tempdir();
    // A 0.2 A discharge of 10 mohm + Voigt(20 mohm, 1 ms) from rest at 3.7 V.
    let mut s = String::from("time_s,voltage_v\n-1e-3,3.7\n");
    for k in 1..=5000 {
        let t = k as f64 * 1e-5;
        let v = 3.7 - 0.2 * (0.01 + 0.02 * (1.0 - (-t / 1e-3).exp()));
        let _ = writeln!(s, "{t},{v}");
    }
    std::fs::write(dir.path().join("dis.csv"), s).unwrap();
    let run = taumap(
        dir.path(),
        &[
            "transient",
            "dis.csv",
            "--current-step-a",
            "0.2",
            "--json",
            "--no-plots",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    assert!(
        run.stderr
            .starts_with("warning: dis.csv: the voltage moves against"),
        "{}",
        run.explain()
    );
    // The sign, then its consequences (no non-negative model fits a voltage
    // moving against the step): the lambda rule pushed to the top of its
    // grid, an empty distribution, a residual far above any noise.
    let warnings = json(&run)["warnings"].as_array().unwrap().clone();
    assert_eq!(warnings.len(), 4, "{}", run.explain());
    assert!(warnings[0].as_str().unwrap().contains("check the sign"));
    assert!(
        warnings[3]
            .as_str()
            .unwrap()
            .contains("the fit misses the data")
    );
    assert_eq!(json(&run)["lambda_grid_edge"], "upper");
    assert_eq!(
        run.stderr.matches("warning: dis.csv:").count(),
        4,
        "{}",
        run.explain()
    );
    let run = taumap(
        dir.path(),
        &[
            "transient",
            "dis.csv",
            "--current-step-a=-0.2",
            "--fit-start",
            "1e-4",
            "--json",
            "--no-plots",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    assert!(run.stderr.is_empty(), "{}", run.explain());
    let j = json(&run);
    assert_eq!(j["n_skipped_early"], 9);
    assert_eq!(j["settings"]["fit_start_s"], 1e-4);
    assert!((j["r_pol_ohm"].as_f64().unwrap() / 0.02 - 1.0).abs() < 0.03);
}

/// Writes `name` in `dir`: a `time_s,voltage_v` row per time.
fn write_record(dir: &std::path::Path, name: &str, t: &[f64], v: &[f64]) {
    let mut s = String::from("time_s,voltage_v\n");
    for (t, v) in t.iter().zip(v) {
        let _ = writeln!(s, "{t},{v}");
    }
    std::fs::write(dir.join(name), s).unwrap();
}

/// Runs `taumap transient NAME --json --no-plots ARGS`, expects success and
/// returns the run and the warnings of its summary.json.
fn transient_json(dir: &std::path::Path, name: &str, args: &[&str]) -> (Run, Vec<String>) {
    let mut all = vec!["transient", name, "--json", "--no-plots"];
    all.extend_from_slice(args);
    let run = taumap(dir, &all);
    assert_eq!(run.code, 0, "{}", run.explain());
    let warnings = json(&run)["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap().to_string())
        .collect();
    (run, warnings)
}

/// Absolute voltages where changes were expected: a 3.7 V cell under a
/// 0.5 A step, logged from the step on without a baseline, is warned about
/// with the level, the change, their ratio and what to do; with
/// `--baseline` it inverts cleanly. Absolute values not far above their
/// change, under a discharge step, fit nothing at all, and the same advice
/// comes with that verdict.
#[test]
fn absolute_values_without_a_baseline_are_warned() {
    let dir = tempdir();
    let t = taumap::synth::log_times(1e-5, 1.0, 50.0);
    let cell = taumap::synth::cells::two_voigts();
    let v: Vec<f64> = t
        .iter()
        .map(|&t| 3.7 + 0.5 * cell.current_step_ohm(t))
        .collect();
    write_record(dir.path(), "abs.csv", &t, &v);
    let (run, warnings) = transient_json(dir.path(), "abs.csv", &["--current-step-a", "0.5"]);
    let want = "the record has no samples before the step and no --baseline, so its values are \
                taken as changes from the pre-step state; their level (3.7300e0 V) is 150 times \
                their change over the record (2.488e-2 V; more than 10 times): if these are \
                absolute values, give the pre-step value with --baseline or include samples \
                before the step (t < 0)";
    assert_eq!(warnings[0], want, "{}", run.explain());
    assert!(
        run.stderr
            .starts_with(&format!("warning: abs.csv: {want}\n")),
        "{}",
        run.explain()
    );
    let (run, warnings) = transient_json(
        dir.path(),
        "abs.csv",
        &["--current-step-a", "0.5", "--baseline", "3.7"],
    );
    assert!(
        warnings.is_empty() && run.stderr.is_empty(),
        "{}",
        run.explain()
    );
    assert!((json(&run)["r_pol_ohm"].as_f64().unwrap() / 0.05 - 1.0).abs() < 0.02);

    // 1.0 V falling by 0.3 V under a 0.1 A discharge, read as changes: every
    // y = v / I is negative and no non-negative model fits it.
    let v: Vec<f64> = t
        .iter()
        .map(|t| 1.0 - 0.3 * (1.0 - (-t / 1e-3).exp()))
        .collect();
    write_record(dir.path(), "low.csv", &t, &v);
    let (run, warnings) = transient_json(dir.path(), "low.csv", &["--current-step-a=-0.1"]);
    let nothing: Vec<&String> = warnings
        .iter()
        .filter(|w| w.starts_with("the fit explains nothing of the record"))
        .collect();
    assert_eq!(nothing.len(), 1, "{}", run.explain());
    assert!(
        nothing[0].ends_with(
            "give the pre-step value with --baseline or include samples before the step (t < 0)"
        ),
        "{}",
        nothing[0]
    );
    assert!(
        run.stderr
            .contains(&format!("warning: low.csv: {}\n", nothing[0])),
        "{}",
        run.explain()
    );
}

/// A response below what double precision resolves against its level
/// (3.7 V before the step, 1e-14 V of change after it) is refused with
/// exit 2, the file named and nothing written.
#[test]
fn changes_below_double_precision_are_refused() {
    let dir = tempdir();
    let mut t: Vec<f64> = (1..=10).rev().map(|k| -(k as f64) * 1e-4).collect();
    t.extend(taumap::synth::log_times(1e-5, 1.0, 50.0));
    let v: Vec<f64> = t
        .iter()
        .map(|&t| {
            if t < 0.0 {
                3.7
            } else {
                3.7 + 1e-14 * (1.0 - (-t / 1e-3).exp())
            }
        })
        .collect();
    write_record(dir.path(), "tiny.csv", &t, &v);
    let run = taumap(
        dir.path(),
        &[
            "transient",
            "tiny.csv",
            "--current-step-a",
            "1",
            "--out",
            "o",
        ],
    );
    assert_clean_failure(
        &run,
        "error: tiny.csv: the response does not change beyond double-precision rounding: by ",
        dir.path(),
        "o",
    );
    assert!(
        run.stderr
            .contains("from the pre-step value 3.7000e0 V, against a level of 3.7000e0 V (less than 1000 times the rounding there, 8.2e-13 V)"),
        "{}",
        run.explain()
    );
}

/// The L-curve over-smooths a noise-free record of the reference cell
/// 5 ohm + ZARC(20 ohm, 0.1 ms) + Voigt(30 ohm, 1 ms): the residual is far
/// above the noise the data show, said with both numbers on stderr and in
/// summary.json; the default rule on the same record says nothing.
#[test]
fn a_residual_far_above_the_noise_is_warned() {
    let dir = tempdir();
    let t = taumap::synth::log_times(1e-6, 1.0, 100.0);
    let cell = taumap::synth::cells::zarc_plus_voigt();
    let v: Vec<f64> = t.iter().map(|&t| 0.1 * cell.current_step_ohm(t)).collect();
    write_record(dir.path(), "lc.csv", &t, &v);
    let (run, warnings) = transient_json(
        dir.path(),
        "lc.csv",
        &["--current-step-a", "0.1", "--lambda", "lcurve"],
    );
    assert_eq!(warnings.len(), 1, "{}", run.explain());
    let w = &warnings[0];
    assert!(
        w.starts_with("the residual (0.49 % rms of the scaled data) is "),
        "{}",
        run.explain()
    );
    assert!(
        w.contains(
            "times the noise level the data show around their best fit (0.00 %; more than 3 times)"
        ),
        "{}",
        run.explain()
    );
    assert_eq!(run.stderr, format!("warning: lc.csv: {w}\n"));
    let (run, warnings) = transient_json(dir.path(), "lc.csv", &["--current-step-a", "0.1"]);
    assert!(
        warnings.is_empty() && run.stderr.is_empty(),
        "{}",
        run.explain()
    );
}

/// `--fit-end` drops the samples after it: the record length, the grid's
/// upper end and the summary follow; a value not after `--fit-start` is
/// refused as an option error.
#[test]
fn fit_end_limits_the_fitted_record() {
    let dir = tempdir();
    let pulse = repo_root().join("demo-data/button-cell-700c-pulse.csv");
    let p = pulse.to_str().unwrap();
    let full = taumap(
        dir.path(),
        &[
            "transient",
            p,
            "--current-step-a",
            "-0.1",
            "--out",
            "a",
            "--no-plots",
            "--json",
        ],
    );
    assert_eq!(full.code, 0, "{}", full.explain());
    let cut = taumap(
        dir.path(),
        &[
            "transient",
            p,
            "--current-step-a",
            "-0.1",
            "--out",
            "b",
            "--no-plots",
            "--json",
            "--fit-end",
            "0.05",
        ],
    );
    assert_eq!(cut.code, 0, "{}", cut.explain());
    let (a, b) = (json(&full), json(&cut));
    assert_eq!(b["settings"]["fit_end_s"].as_f64(), Some(0.05));
    assert!(a["settings"]["fit_end_s"].is_null());
    assert_eq!(a["n_skipped_late"].as_u64(), Some(0));
    let late = b["n_skipped_late"].as_u64().unwrap();
    let (na, nb) = (
        a["n_samples"].as_u64().unwrap(),
        b["n_samples"].as_u64().unwrap(),
    );
    assert!(late > 0 && nb + late == na, "{na} {nb} {late}");
    assert!(
        b["settings"]["tau_max_s"].as_f64().unwrap() < a["settings"]["tau_max_s"].as_f64().unwrap()
    );
    let bad = taumap(
        dir.path(),
        &[
            "transient",
            p,
            "--current-step-a",
            "-0.1",
            "--out",
            "c",
            "--fit-end",
            "0",
        ],
    );
    assert_clean_failure(
        &bad,
        "error: parameter `fit-end` must be a time in seconds after the step and after fit-start, got 0",
        dir.path(),
        "c",
    );
}
