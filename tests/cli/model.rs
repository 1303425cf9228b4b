//! `taumap model` end to end: a model file simulated, the spectrum fitted
//! back to the same elements and values; the demo's known circuit
//! recovered; the outputs scripts read; `--start` and its errors.

use crate::util::{assert_clean_failure, repo_root, taumap, tempdir};
use serde_json::Value;
use std::path::Path;

/// A circuit of distinct shapes: a fast ZARC, a Voigt element and a slow
/// transmissive Warburg element behind a resistor.
const TRUTH: &str = "\
# three processes of distinct shape
resistor              r_s      r=20mohm
zarc                  fast     r=15mohm  tau=30us  phi=0.75
voigt                 middle   r=10mohm  tau=2ms
warburg-transmissive  slow     r=20mohm  tau=1s
";

fn read_json(p: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(p).expect("summary.json written"))
        .expect("valid JSON")
}

/// Model text -> simulate -> model: the same element kinds in the same
/// order, every parameter within two of its standard errors (0.1 % noise,
/// fixed seed), and the written model.txt parses back to the summary's
/// values.
#[test]
fn simulated_model_round_trips() {
    let dir = tempdir();
    std::fs::write(dir.path().join("truth.txt"), TRUTH).unwrap();
    let sim = taumap(
        dir.path(),
        &[
            "simulate",
            "truth.txt",
            "--from-hz",
            "0.01",
            "--to-hz",
            "1e6",
            "--noise-rel",
            "0.001",
            "--seed",
            "4",
            "--out",
            "cell.csv",
        ],
    );
    assert_eq!(sim.code, 0, "{}", sim.explain());
    let run = taumap(
        dir.path(),
        &["model", "cell.csv", "--out", "fit", "--no-plots"],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let s = read_json(&dir.path().join("fit/summary.json"));
    assert_eq!(s["processes"], 3, "{}", run.stdout);
    let chosen = &s["candidates"][s["chosen_index"].as_u64().unwrap() as usize];
    let truth = taumap::circuit::Model::parse(TRUTH, Path::new("truth.txt")).unwrap();
    let elements = chosen["elements"].as_array().unwrap();
    let kinds: Vec<&str> = elements
        .iter()
        .map(|e| e["kind"].as_str().unwrap())
        .collect();
    assert_eq!(
        kinds,
        ["resistor", "zarc", "voigt", "warburg-transmissive"],
        "{}",
        run.stdout
    );
    for (e, t) in elements.iter().zip(&truth.elements) {
        for (p, tv) in e["params"]
            .as_array()
            .unwrap()
            .iter()
            .zip(t.element.params())
        {
            let (v, se) = (p["value"].as_f64().unwrap(), p["se"].as_f64().unwrap());
            assert!(
                (v - tv).abs() <= 2.0 * se,
                "{}.{}: {v} +- {se} vs {tv}",
                e["kind"],
                p["name"]
            );
        }
    }
    // model.txt is a model file: it parses, and to the printed precision
    // holds the summary's values.
    let back = taumap::circuit::Model::read(&dir.path().join("fit/model.txt")).unwrap();
    for (e, b) in elements.iter().zip(&back.elements) {
        for (p, bv) in e["params"]
            .as_array()
            .unwrap()
            .iter()
            .zip(b.element.params())
        {
            assert!((p["value"].as_f64().unwrap() / bv - 1.0).abs() < 1e-5);
        }
    }
    // The chosen text in summary.json is the same circuit.
    let chosen_text =
        taumap::circuit::Model::parse(s["chosen"].as_str().unwrap(), Path::new("chosen")).unwrap();
    assert_eq!(chosen_text.elements.len(), 4);
    // Scripts read every candidate's numbers.
    for c in s["candidates"].as_array().unwrap() {
        for key in ["processes", "bic", "aic", "chi2", "elements"] {
            assert!(!c[key].is_null(), "candidate without {key}");
        }
    }
    let csv = std::fs::read_to_string(dir.path().join("fit/parameters.csv")).unwrap();
    assert!(csv.starts_with("processes,chosen,element,label,kind,param,unit,value,se,fixed\n"));
    assert!(
        csv.lines()
            .any(|l| l.starts_with("3,true,3,voigt1,voigt,tau,s,")),
        "{csv}"
    );
}

/// The demo spectrum (an invented cell with known elements, 0.3 % noise):
/// the chosen circuit is the demo's, every value within 3 standard errors
/// of the truth (src/cli/demo.rs: 0.150 ohm, 80 nH, ZARC 0.080 ohm 20 us
/// 0.85, ZARC 0.120 ohm 1 ms 0.95, Warburg 0.050 ohm 0.5 s); the figures
/// are written.
#[test]
fn demo_circuit_is_recovered() {
    let dir = tempdir();
    let input = repo_root().join("demo-data/button-cell-700c.csv");
    let run = taumap(
        dir.path(),
        &["model", input.to_str().unwrap(), "--out", "m"],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let s = read_json(&dir.path().join("m/summary.json"));
    assert_eq!(s["processes"], 3);
    let chosen = &s["candidates"][s["chosen_index"].as_u64().unwrap() as usize];
    let truth: [(&str, &[f64]); 5] = [
        ("resistor", &[0.150]),
        ("inductor", &[8e-8]),
        ("zarc", &[0.080, 2e-5, 0.85]),
        ("zarc", &[0.120, 1e-3, 0.95]),
        ("warburg-transmissive", &[0.050, 0.5]),
    ];
    let elements = chosen["elements"].as_array().unwrap();
    assert_eq!(elements.len(), 5, "{}", run.stdout);
    for (e, (kind, values)) in elements.iter().zip(truth) {
        assert_eq!(e["kind"], kind, "{}", run.stdout);
        for (p, tv) in e["params"].as_array().unwrap().iter().zip(values) {
            let (v, se) = (p["value"].as_f64().unwrap(), p["se"].as_f64().unwrap());
            assert!(
                (v - tv).abs() <= 3.0 * se,
                "{kind}.{}: {v} +- {se} vs {tv}",
                p["name"]
            );
        }
    }
    for f in [
        "model.txt",
        "parameters.csv",
        "fit.csv",
        "drt.csv",
        "model-nyquist.svg",
        "model-bode.png",
        "model-drt.svg",
    ] {
        assert!(dir.path().join("m").join(f).is_file(), "{f} missing");
    }
}

/// `--start`: the given circuit is fitted with its fixed parameter held
/// and its labels kept; a broken start file fails before any output.
#[test]
fn start_model_is_fitted_and_checked() {
    let dir = tempdir();
    std::fs::write(dir.path().join("truth.txt"), TRUTH).unwrap();
    let sim = taumap(
        dir.path(),
        &[
            "simulate",
            "truth.txt",
            "--noise-rel",
            "0.002",
            "--out",
            "cell.csv",
        ],
    );
    assert_eq!(sim.code, 0, "{}", sim.explain());
    let start = "resistor r_s r=25mohm\nzarc fast r=10mohm tau=50us phi=0.75 fixed\nzarc mid r=12mohm tau=1ms phi=0.9\nwarburg-transmissive slow r=15mohm tau=0.8s\n";
    std::fs::write(dir.path().join("start.txt"), start).unwrap();
    let run = taumap(
        dir.path(),
        &[
            "model",
            "cell.csv",
            "--start",
            "start.txt",
            "--out",
            "s",
            "--no-plots",
            "--json",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let s: Value = serde_json::from_str(&run.stdout).expect("--json prints the summary");
    assert_eq!(s["candidates"].as_array().unwrap().len(), 1);
    let fast = &s["candidates"][0]["elements"][1];
    assert_eq!(fast["label"], "fast");
    assert_eq!(fast["params"][2]["value"], 0.75);
    assert_eq!(fast["params"][2]["fixed"], true);
    assert!(fast["params"][2]["se"].is_null());
    // The fixed phi is the truth: R and tau come back.
    assert!(
        (fast["params"][0]["value"].as_f64().unwrap() / 0.015 - 1.0).abs() < 0.05,
        "{fast}"
    );
    assert!(s["chosen"].as_str().unwrap().contains("fixed"));

    std::fs::write(
        dir.path().join("bad.txt"),
        "resistor r=25mohm\nzarc r=10mohm tau=50us\n",
    )
    .unwrap();
    let bad = taumap(
        dir.path(),
        &["model", "cell.csv", "--start", "bad.txt", "--out", "b"],
    );
    assert_clean_failure(&bad, "bad.txt:2:", dir.path(), "b");
    let k = taumap(
        dir.path(),
        &["model", "cell.csv", "--max-processes", "0", "--out", "k"],
    );
    assert_clean_failure(&k, "max-processes", dir.path(), "k");
}

/// Faults of the data reach the model's warnings (stderr and
/// summary.json): a spectrum with the sign of Z'' flipped gets the
/// reader's warning, the inversion's and the circuit's own.
#[test]
fn warnings_of_the_data_are_passed_on() {
    let dir = tempdir();
    let flipped: String = crate::util::voigt_csv()
        .lines()
        .enumerate()
        .map(|(i, l)| {
            if i == 0 {
                return format!("{l}\n");
            }
            let v: Vec<f64> = l.split(',').map(|x| x.parse().unwrap()).collect();
            format!("{},{},{}\n", v[0], v[1], -v[2])
        })
        .collect();
    std::fs::write(dir.path().join("flip.csv"), flipped).unwrap();
    let run = taumap(
        dir.path(),
        &["model", "flip.csv", "--out", "f", "--no-plots"],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let s = read_json(&dir.path().join("f/summary.json"));
    let w: Vec<&str> = s["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().unwrap())
        .collect();
    assert!(
        w.iter().any(|x| x.contains("imaginary part is positive")),
        "{w:?}"
    );
    assert!(w.iter().any(|x| x.starts_with("inversion: ")), "{w:?}");
    assert!(w.iter().any(|x| x.contains("misses the data by")), "{w:?}");
    assert!(
        run.stderr.contains("warning: flip.csv: "),
        "{}",
        run.explain()
    );
}

/// Starts far from the data: tau of 1 s for a process at 1 ms converges
/// to the truth; tau of 1000 s leaves the process outside the band, the
/// minimiser's steps to extreme values are rejected (not fatal), and the
/// run ends with a result that says loudly it is not one.
#[test]
fn distant_starts_converge_or_warn() {
    let dir = tempdir();
    std::fs::write(dir.path().join("v.csv"), crate::util::voigt_csv()).unwrap();
    std::fs::write(
        dir.path().join("far.txt"),
        "resistor r=1ohm\nvoigt r=20ohm tau=1s\n",
    )
    .unwrap();
    let run = taumap(
        dir.path(),
        &[
            "model",
            "v.csv",
            "--start",
            "far.txt",
            "--out",
            "o",
            "--no-plots",
            "--json",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let s: Value = serde_json::from_str(&run.stdout).unwrap();
    let voigt = &s["candidates"][0]["elements"][1]["params"];
    // voigt_csv: 50 ohm at 1 ms behind 10 ohm.
    assert!(
        (voigt[0]["value"].as_f64().unwrap() / 50.0 - 1.0).abs() < 1e-3,
        "{voigt}"
    );
    assert!(
        (voigt[1]["value"].as_f64().unwrap() / 1e-3 - 1.0).abs() < 1e-3,
        "{voigt}"
    );
    assert!(
        s["warnings"].as_array().unwrap().is_empty(),
        "{}",
        s["warnings"]
    );

    std::fs::write(
        dir.path().join("lost.txt"),
        "resistor r=1ohm\nvoigt r=20ohm tau=1ks\n",
    )
    .unwrap();
    let run = taumap(
        dir.path(),
        &[
            "model",
            "v.csv",
            "--start",
            "lost.txt",
            "--out",
            "l",
            "--no-plots",
            "--json",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let s: Value = serde_json::from_str(&run.stdout).unwrap();
    let w = s["warnings"].to_string();
    assert!(w.contains("misses the data by"), "{w}");
}

/// The candidates are fitted in parallel: the outputs are byte-identical
/// for 1 and 3 threads.
#[test]
fn output_is_the_same_for_any_thread_count() {
    let dir = tempdir();
    let input = repo_root().join("demo-data/button-cell-700c.csv");
    let mut outputs = Vec::new();
    for threads in ["1", "3"] {
        let out = format!("t{threads}");
        let status = std::process::Command::new(env!("CARGO_BIN_EXE_taumap"))
            .args([
                "model",
                input.to_str().unwrap(),
                "--out",
                &out,
                "--no-plots",
            ])
            .env("RAYON_NUM_THREADS", threads)
            .current_dir(dir.path())
            .output()
            .unwrap();
        assert!(status.status.success());
        let read = |f: &str| std::fs::read(dir.path().join(&out).join(f)).unwrap();
        outputs.push((
            read("summary.json"),
            read("model.txt"),
            read("parameters.csv"),
        ));
    }
    assert!(
        outputs[0] == outputs[1],
        "outputs differ between 1 and 3 threads"
    );
}
