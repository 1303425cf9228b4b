//! `taumap track` on folders, file lists and one long series file.

use crate::util::{assert_clean_failure, taumap, tempdir};
use std::fmt::Write as _;
use std::path::Path;
use taumap::synth::{Element, Series, add_noise, log_frequencies};

fn json(path: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// The cell at cycle `k` of 8: a fixed fast ZARC and a slow one whose
/// tau and R grow with the cycle, 0.2 % noise.
fn cell(k: usize) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let x = k as f64 / 8.0;
    let cell = Series(vec![
        Element::Resistor { r_ohm: 1.0 },
        Element::Zarc {
            r_ohm: 4.0,
            tau_s: 1e-4,
            phi: 0.9,
        },
        Element::Zarc {
            r_ohm: 8.0 * (1.0 + 0.25 * x),
            tau_s: 2e-2 * (1.0 + x),
            phi: 0.9,
        },
    ]);
    let f = log_frequencies(1e-2, 1e5, 8.0);
    let (mut re, mut im) = cell.sample(&f);
    add_noise(&mut re, &mut im, 2e-3, 50 + k as u64);
    (f, re, im)
}

fn rows(k: usize, prefix: &str) -> String {
    let (f, re, im) = cell(k);
    let mut s = String::new();
    for i in 0..f.len() {
        let _ = writeln!(s, "{prefix}{},{},{}", f[i], re[i], im[i]);
    }
    s
}

/// Cycles 1..=8 as `dir/cycle-K.csv`.
fn write_cycles(dir: &Path) {
    std::fs::create_dir_all(dir).unwrap();
    for k in 1..=8 {
        let text = format!("frequency_hz,z_re_ohm,z_im_ohm\n{}", rows(k, ""));
        std::fs::write(dir.join(format!("cycle-{k}.csv")), text).unwrap();
    }
}

#[test]
fn files_out_of_order_are_ordered_by_number_and_a_broken_one_is_skipped() {
    let tmp = tempdir();
    let d = tmp.path();
    write_cycles(&d.join("cycles"));
    // Cycle 5 is broken on its fourth line.
    let broken = d.join("cycles/cycle-5.csv");
    let text = std::fs::read_to_string(&broken).unwrap();
    let mut lines: Vec<&str> = text.lines().collect();
    lines[3] = "12.5,oops,-3";
    std::fs::write(&broken, lines.join("\n")).unwrap();
    let order = [8, 3, 1, 5, 2, 7, 4, 6];
    let args: Vec<String> = order
        .iter()
        .map(|k| format!("cycles/cycle-{k}.csv"))
        .collect();
    let mut argv: Vec<&str> = vec!["track"];
    argv.extend(args.iter().map(String::as_str));
    argv.extend(["--out", "out", "--no-plots"]);
    let run = taumap(d, &argv);
    assert_eq!(run.code, 3, "{}", run.explain());
    assert!(
        run.stderr.contains("cycle-5.csv") && run.stderr.contains(":4:"),
        "the broken file and line are named\n{}",
        run.explain()
    );
    assert!(
        run.stderr.contains("1 of 8 spectra skipped"),
        "{}",
        run.explain()
    );
    assert!(!run.stderr.contains("panicked"));
    let spectra = std::fs::read_to_string(d.join("out/spectra.csv")).unwrap();
    let inputs: Vec<String> = spectra
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(2).unwrap().to_string())
        .collect();
    let expected: Vec<String> = (1..=8).map(|k| format!("cycles/cycle-{k}.csv")).collect();
    assert_eq!(inputs, expected);
    assert!(spectra.lines().nth(5).unwrap().contains(",skipped,"));
    let s = json(&d.join("out/summary.json"));
    assert_eq!(s["inverted"], 7);
    assert_eq!(s["skipped"][0]["spectrum"], 4);
    assert_eq!(s["label"]["from"], "name");
    // Two processes followed through the seven good cycles, labelled by
    // the number in the file name.
    assert_eq!(s["tracks"].as_array().unwrap().len(), 2, "{s}");
    assert_eq!(s["tracks"][1]["points"], 7);
    assert_eq!(s["tracks"][1]["first_label"], 1.0);
    assert_eq!(s["tracks"][1]["last_label"], 8.0);
    let tracks = std::fs::read_to_string(d.join("out/tracks.csv")).unwrap();
    assert!(tracks.starts_with("spectrum,label,track,tau_s,r_ohm,gamma_ohm"));
    assert!(
        !tracks.lines().any(|l| l.starts_with("4,")),
        "nothing from the skipped one"
    );
    // The slow process's tau grows from 2.25e-2 to 4e-2 s (cycles 1 to 8).
    let slow = &s["tracks"][1];
    let (t0, t1) = (
        slow["tau_first_s"].as_f64().unwrap(),
        slow["tau_last_s"].as_f64().unwrap(),
    );
    assert!((t0 / 2.25e-2 - 1.0).abs() < 0.1, "{t0}");
    assert!((t1 / 4e-2 - 1.0).abs() < 0.1, "{t1}");
    // --keep-order keeps the command line's order.
    argv.push("--keep-order");
    let out2 = argv.iter().position(|a| *a == "out").unwrap();
    argv[out2] = "kept";
    let run = taumap(d, &argv);
    assert_eq!(run.code, 3, "{}", run.explain());
    let kept = std::fs::read_to_string(d.join("kept/spectra.csv")).unwrap();
    assert!(kept.lines().nth(1).unwrap().contains("cycle-8.csv"));
}

#[test]
fn a_series_file_gives_the_same_tracks_as_separate_files() {
    let tmp = tempdir();
    let d = tmp.path();
    write_cycles(&d.join("cycles"));
    let mut long = String::from("# one file, every cycle\ncycle,frequency_hz,z_re_ohm,z_im_ohm\n");
    for k in 1..=8 {
        long.push_str(&rows(k, &format!("{k},")));
    }
    std::fs::write(d.join("all.csv"), long).unwrap();
    let files = taumap(d, &["track", "cycles", "--out", "a"]);
    assert_eq!(files.code, 0, "{}", files.explain());
    let one = taumap(
        d,
        &[
            "track",
            "--series",
            "all.csv",
            "--by",
            "cycle",
            "--out",
            "b",
            "--no-plots",
        ],
    );
    assert_eq!(one.code, 0, "{}", one.explain());
    for name in ["tracks.csv", "trends.csv", "drt-series.csv"] {
        let a = std::fs::read_to_string(d.join("a").join(name)).unwrap();
        let b = std::fs::read_to_string(d.join("b").join(name)).unwrap();
        assert_eq!(a, b, "{name} differs");
    }
    let s = json(&d.join("b/summary.json"));
    assert_eq!(s["label"]["from"], "column");
    assert_eq!(s["spectra"], 8);
    // The folder run wrote its figures; the series run none.
    for f in ["heatmap.svg", "heatmap.png", "trends.svg", "trends.png"] {
        assert!(d.join("a").join(f).exists(), "{f}");
        assert!(!d.join("b").join(f).exists(), "{f}");
    }
    assert!(!d.join("a/arrhenius.svg").exists());
    // drt-series.csv: every spectrum on the same grid.
    let drt = std::fs::read_to_string(d.join("a/drt-series.csv")).unwrap();
    let points = s["grid"]["points"].as_u64().unwrap() as usize;
    assert_eq!(drt.lines().count(), 1 + 8 * points);
    let taus = |k: usize| -> Vec<String> {
        drt.lines()
            .skip(1)
            .filter(|l| l.starts_with(&format!("{k},")))
            .map(|l| l.split(',').nth(2).unwrap().to_string())
            .collect()
    };
    assert_eq!(taus(0), taus(7));
}

#[test]
fn temperature_labels_give_an_arrhenius_plot_and_energies() {
    let tmp = tempdir();
    let d = tmp.path();
    std::fs::create_dir_all(d.join("temps")).unwrap();
    // One process with 0.8 eV in tau and R (exp(E_a/(k_B T)), k_B from
    // CODATA 2018), 600 to 750 degC.
    for t_c in [600.0, 650.0, 700.0, 750.0] {
        let t_k: f64 = t_c + 273.15;
        let g = (0.8 / taumap::series::K_B_EV_PER_K * (1.0 / t_k - 1.0 / 973.15)).exp();
        let cell = Series(vec![
            Element::Resistor { r_ohm: 0.5 },
            Element::Zarc {
                r_ohm: 3.0 * g,
                tau_s: 1e-3 * g,
                phi: 0.9,
            },
        ]);
        let f = log_frequencies(1e-2, 1e5, 10.0);
        let (re, im) = cell.sample(&f);
        let mut s = String::from("frequency_hz,z_re_ohm,z_im_ohm\n");
        for i in 0..f.len() {
            let _ = writeln!(s, "{},{},{}", f[i], re[i], im[i]);
        }
        std::fs::write(d.join(format!("temps/T{t_c}C.csv")), s).unwrap();
    }
    let run = taumap(d, &["track", "temps", "--label-unit", "degC", "--json"]);
    assert_eq!(run.code, 0, "{}", run.explain());
    let s: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(s["label"]["temperature"], true);
    let t = &s["tracks"][0];
    assert!((t["ea_tau_ev"].as_f64().unwrap() - 0.8).abs() < 0.03, "{t}");
    assert!((t["ea_r_ev"].as_f64().unwrap() - 0.8).abs() < 0.03, "{t}");
    // The default folder sits beside the spectra's folder.
    assert!(d.join("temps-track/arrhenius.svg").exists());
    assert!(d.join("temps-track/arrhenius.png").exists());
    let trends = std::fs::read_to_string(d.join("temps-track/trends.csv")).unwrap();
    assert!(
        trends
            .lines()
            .next()
            .unwrap()
            .ends_with("ea_r_ev,ea_r_se_ev")
    );
}

#[test]
fn bad_series_input_fails_cleanly() {
    let tmp = tempdir();
    let d = tmp.path();
    write_cycles(&d.join("cycles"));
    std::fs::create_dir_all(d.join("plain")).unwrap();
    std::fs::copy(d.join("cycles/cycle-1.csv"), d.join("plain/first.csv")).unwrap();
    std::fs::copy(d.join("cycles/cycle-2.csv"), d.join("plain/second.csv")).unwrap();
    let run = taumap(d, &["track", "plain", "--label-unit", "K", "--out", "o"]);
    assert_clean_failure(&run, "temperature label for every spectrum", d, "o");
    let run = taumap(d, &["track", "plain", "--label-from", "name", "--out", "o"]);
    assert_clean_failure(&run, "first.csv: --label-from name", d, "o");
    let run = taumap(
        d,
        &["track", "cycles", "--label-from", "column", "--out", "o"],
    );
    assert_clean_failure(&run, "--label-from column needs --series", d, "o");
    let mut long = String::from("cycle,frequency_hz,z_re_ohm,z_im_ohm\n");
    long.push_str(&rows(1, "1,"));
    std::fs::write(d.join("all.csv"), &long).unwrap();
    let run = taumap(
        d,
        &["track", "--series", "all.csv", "--by", "soc", "--out", "o"],
    );
    assert_clean_failure(&run, "all.csv:1: no column \"soc\" for --by", d, "o");
    std::fs::create_dir_all(d.join("junk")).unwrap();
    std::fs::write(d.join("junk/a-1.csv"), "nothing here\n").unwrap();
    std::fs::write(d.join("junk/a-2.csv"), "frequency_hz,z_re_ohm\n1,2\n").unwrap();
    let run = taumap(d, &["track", "junk", "--out", "o"]);
    assert_clean_failure(&run, "no spectrum of the series could be read", d, "o");
    std::fs::create_dir_all(d.join("empty")).unwrap();
    let run = taumap(d, &["track", "empty", "--out", "o"]);
    assert_clean_failure(&run, "holds no spectrum files", d, "o");
    // Writing into the spectra's own folder would read outputs as spectra
    // and replace inputs named like outputs: refused, inputs untouched.
    std::fs::copy(d.join("cycles/cycle-3.csv"), d.join("cycles/fit.csv")).unwrap();
    let run = taumap(d, &["track", "cycles", "--out", "cycles"]);
    assert_eq!(run.code, 2, "{}", run.explain());
    assert!(
        run.stderr.contains("holds the series' own files"),
        "{}",
        run.explain()
    );
    assert!(d.join("cycles/fit.csv").exists());
    assert!(!d.join("cycles/summary.json").exists());
    // A name without a number turns the labels off, and says so.
    let run = taumap(d, &["track", "plain", "--out", "p", "--no-plots"]);
    assert_eq!(run.code, 0, "{}", run.explain());
    assert!(
        run.stderr
            .contains("first.csv: the file name holds no number"),
        "{}",
        run.explain()
    );
}
