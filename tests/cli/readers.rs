//! The readers through the CLI: exports as instruments and spreadsheets
//! write them give the same result as the canonical file; standard input;
//! column choices on the command line.

use crate::util::{assert_clean_failure, taumap, tempdir, voigt_csv};
use std::io::Write;
use std::process::{Command, Stdio};

/// The summary's numbers that must not depend on how the file was written.
fn key_numbers(json: &str) -> Vec<f64> {
    let v: serde_json::Value = serde_json::from_str(json).expect("summary.json parses");
    let mut out = vec![
        v["r_inf_ohm"].as_f64().unwrap(),
        v["r_pol_ohm"].as_f64().unwrap(),
        v["lambda"].as_f64().unwrap(),
        v["residual_rms_rel"].as_f64().unwrap(),
    ];
    for p in v["peaks"].as_array().unwrap() {
        out.push(p["tau_s"].as_f64().unwrap());
        out.push(p["r_ohm"].as_f64().unwrap());
    }
    out
}

fn assert_same(a: &[f64], b: &[f64], rel: f64) {
    assert_eq!(a.len(), b.len(), "{a:?} vs {b:?}");
    for (x, y) in a.iter().zip(b) {
        assert!((x - y).abs() <= rel * x.abs().max(1e-300), "{a:?} vs {b:?}");
    }
}

/// The canonical Voigt spectrum rewritten as a European lab export: Latin-1
/// text, a settings block above the header, semicolons, decimal commas,
/// kHz and milliohm columns under ISO quantity/unit headings, -Im(Z), a
/// trailing delimiter. The inversion must agree with the canonical file to
/// rounding of the unit conversions.
#[test]
fn a_lab_export_inverts_like_the_canonical_file() {
    let dir = tempdir();
    let canonical = voigt_csv();
    std::fs::write(dir.path().join("cell.csv"), &canonical).unwrap();
    let mut latin1 =
        b"Messung Zelle 4\r\nTemperatur: 25 \xB0C\r\nFl\xE4che: 1,0 cm2\r\n\r\n".to_vec();
    latin1.extend_from_slice(b"f/kHz;Re(Z)/mOhm;x;-Im(Z)/mOhm\r\n");
    for line in canonical.lines().skip(1) {
        let v: Vec<f64> = line.split(',').map(|x| x.parse().unwrap()).collect();
        let row =
            format!("{:e};{:e};7;{:e};\r\n", v[0] / 1e3, v[1] * 1e3, -v[2] * 1e3).replace('.', ",");
        latin1.extend_from_slice(row.as_bytes());
    }
    std::fs::write(dir.path().join("export.txt"), &latin1).unwrap();

    let a = taumap(
        dir.path(),
        &["invert", "cell.csv", "--out", "a", "--no-plots", "--json"],
    );
    assert_eq!(a.code, 0, "{}", a.explain());
    let b = taumap(
        dir.path(),
        &["invert", "export.txt", "--out", "b", "--no-plots", "--json"],
    );
    assert_eq!(b.code, 0, "{}", b.explain());
    assert_same(&key_numbers(&a.stdout), &key_numbers(&b.stdout), 1e-6);
    for note in [
        "note: export.txt: lines 1-3 are free text above the header (line 5); skipped",
        "note: export.txt: read as Latin-1 (Windows-1252)",
        "note: export.txt: column \"f/kHz\" converted to Hz (x 1e3)",
        "note: export.txt: column \"Re(Z)/mOhm\" converted to ohm (x 1e-3)",
    ] {
        assert!(b.stderr.contains(note), "wanted {note:?}\n{}", b.explain());
    }
}

/// `-` reads standard input; the result equals that of the same file, and
/// without `--out` there is nowhere to write, which is said before reading.
#[test]
fn standard_input_reads_like_a_file() {
    let dir = tempdir();
    std::fs::write(dir.path().join("cell.csv"), voigt_csv()).unwrap();
    let a = taumap(
        dir.path(),
        &["invert", "cell.csv", "--out", "a", "--no-plots", "--json"],
    );
    assert_eq!(a.code, 0, "{}", a.explain());

    let mut child = Command::new(env!("CARGO_BIN_EXE_taumap"))
        .args(["invert", "-", "--out", "b", "--no-plots", "--json"])
        .current_dir(dir.path())
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    child
        .stdin
        .take()
        .unwrap()
        .write_all(voigt_csv().as_bytes())
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert_eq!(out.status.code(), Some(0));
    let b = String::from_utf8(out.stdout).unwrap();
    assert_eq!(key_numbers(&a.stdout), key_numbers(&b));
    assert_eq!(
        std::fs::read(dir.path().join("a/drt.csv")).unwrap(),
        std::fs::read(dir.path().join("b/drt.csv")).unwrap()
    );

    let run = taumap(dir.path(), &["invert", "-", "--no-plots"]);
    assert_clean_failure(
        &run,
        "error: reading standard input (\"-\") needs an output directory: give --out DIR",
        dir.path(),
        "--taumap",
    );
}

/// Two columns that both name the real part are refused with the option
/// that settles it; with that option the run uses the chosen column.
#[test]
fn column_choice_settles_an_ambiguous_heading() {
    let dir = tempdir();
    let text = voigt_csv()
        .replace("frequency_hz,z_re_ohm,z_im_ohm", "f,Z',Z'',Zre")
        .lines()
        .map(|l| {
            if l.starts_with('f') {
                l.to_string()
            } else {
                format!("{l},99")
            }
        })
        .collect::<Vec<_>>()
        .join("\n");
    std::fs::write(dir.path().join("two.csv"), text).unwrap();
    let run = taumap(
        dir.path(),
        &["invert", "two.csv", "--out", "o", "--no-plots"],
    );
    assert_clean_failure(
        &run,
        "two.csv:1: columns \"Z'\" and \"Zre\" both name the real part (remove or rename one \
         of them, or choose one with --column real=HEADING)",
        dir.path(),
        "o",
    );
    let run = taumap(
        dir.path(),
        &[
            "invert",
            "two.csv",
            "--out",
            "o",
            "--no-plots",
            "--json",
            "--column",
            "real=Z'",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert!(
        (v["r_inf_ohm"].as_f64().unwrap() - 10.0).abs() < 0.05,
        "{}",
        run.stdout
    );

    let run = taumap(
        dir.path(),
        &["invert", "two.csv", "--out", "p", "--column", "time=#1"],
    );
    assert_clean_failure(
        &run,
        "error: --column: unknown role \"time\" for this input (use one of frequency, real, \
         imag, neg-imag, modulus, phase, neg-phase)",
        dir.path(),
        "p",
    );
}
