//! `taumap kk` on files, and the verdict that `taumap invert` adds to its
//! summary.

use crate::util::{repo_root, taumap, tempdir};
use std::fmt::Write as _;

fn json(path: &std::path::Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// A ZARC, 1 ohm + ZARC(2 ohm, 1 ms, phi 0.85), Z = R0 + R / (1 + (j w
/// tau)^phi) (K. S. Cole and R. H. Cole, J. Chem. Phys. 9, 341, 1941),
/// 1e-2 to 1e5 Hz at 10 per decade, swept from the top down, each point
/// taking two periods plus 1 s (common practice), while the resistance of
/// the arc grows from 2 to `2 * (1 + drift)` ohm in proportion to the time
/// elapsed. Deterministic "noise" of 0.1 % (a fixed pseudo-random sequence).
fn drifting_zarc_csv(drift: f64) -> String {
    let f: Vec<f64> = (0..=70)
        .map(|k| 10f64.powf(-2.0 + k as f64 / 10.0))
        .collect();
    let duration: Vec<f64> = f.iter().map(|fi| 2.0 / fi + 1.0).collect();
    let total: f64 = duration.iter().sum();
    let mut s = String::from("frequency_hz,z_re_ohm,z_im_ohm\n");
    let mut state = 12345u64;
    let mut noise = || {
        // A linear congruential sequence mapped to [-1.7, 1.7] (about unit
        // variance): enough to look like noise to the test.
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((state >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 2.0 * 3f64.sqrt()
    };
    for (i, fi) in f.iter().enumerate() {
        let t = (duration[i + 1..].iter().sum::<f64>() + 0.5 * duration[i]) / total;
        let r = 2.0 * (1.0 + drift * t);
        let x = (2.0 * std::f64::consts::PI * fi * 1e-3).powf(0.85);
        let (c, sn) = (
            (0.425 * std::f64::consts::PI).cos(),
            (0.425 * std::f64::consts::PI).sin(),
        );
        let (dr, di) = (1.0 + x * c, x * sn);
        let d2 = dr * dr + di * di;
        let (re, im) = (1.0 + r * dr / d2, -r * di / d2);
        let m = re.hypot(im);
        let _ = writeln!(
            s,
            "{fi},{},{}",
            re + 1e-3 * m * noise(),
            im + 1e-3 * m * noise()
        );
    }
    s
}

#[test]
fn the_demo_spectrum_is_valid_with_every_output() {
    let dir = tempdir();
    let input = repo_root().join("demo-data/button-cell-700c.csv");
    let out = dir.path().join("kk");
    let run = taumap(
        dir.path(),
        &[
            "kk",
            input.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    assert!(
        run.stdout.contains("Kramers-Kronig: valid"),
        "{}",
        run.explain()
    );
    for name in ["residuals.csv", "summary.json", "kk.svg", "kk.png"] {
        assert!(out.join(name).exists(), "missing {name}");
    }
    let csv = std::fs::read_to_string(out.join("residuals.csv")).unwrap();
    assert!(csv.starts_with("frequency_hz,residual_re_rel,residual_im_rel\n"));
    assert_eq!(csv.lines().count(), 62);
    let j = json(&out.join("summary.json"));
    assert_eq!(j["valid"], true, "{j}");
    // The demo's noise is 0.3 % of |Z| (demo-data header): the estimate is
    // within 30 % of it, and the residual within the limit.
    let noise = j["noise_rel"].as_f64().unwrap();
    assert!((noise / 0.003 - 1.0).abs() < 0.3, "{noise}");
    assert_eq!(j["noise_source"], "estimated");
    for key in [
        "residual_rms_rel",
        "threshold_rel",
        "elements",
        "mu",
        "flagged_frequency_hz",
        "inductance_h",
        "series_capacitance_f",
    ] {
        assert!(j.get(key).is_some(), "missing {key}: {j}");
    }
    // The demo's 80 nH lead inductance is in the test's model.
    let l = j["inductance_h"].as_f64().unwrap();
    assert!((l / 80e-9 - 1.0).abs() < 0.1, "{l}");
}

/// A spectrum measured while the arc's resistance doubled fails, says so on
/// stderr, still exits 0; `invert` on it writes `kk_valid: false` and the
/// warning into its summary. Without the drift both pass.
#[test]
fn a_drifting_spectrum_fails_in_kk_and_in_invert() {
    let dir = tempdir();
    for (drift, valid) in [(1.0, false), (0.0, true)] {
        let input = dir.path().join(format!("zarc-{drift}.csv"));
        std::fs::write(&input, drifting_zarc_csv(drift)).unwrap();
        let out = dir.path().join(format!("kk-{drift}"));
        let run = taumap(
            dir.path(),
            &[
                "kk",
                input.to_str().unwrap(),
                "--out",
                out.to_str().unwrap(),
                "--no-plots",
            ],
        );
        assert_eq!(run.code, 0, "{}", run.explain());
        assert_eq!(json(&out.join("summary.json"))["valid"], valid);
        assert_eq!(
            run.stderr.contains("the Kramers-Kronig test fails"),
            !valid,
            "{}",
            run.explain()
        );
        let inv = dir.path().join(format!("inv-{drift}"));
        let run = taumap(
            dir.path(),
            &[
                "invert",
                input.to_str().unwrap(),
                "--out",
                inv.to_str().unwrap(),
                "--no-plots",
            ],
        );
        assert_eq!(run.code, 0, "{}", run.explain());
        let j = json(&inv.join("summary.json"));
        assert_eq!(j["kk_valid"], valid, "{j}");
        assert!(j["kk_residual_rms_rel"].as_f64().unwrap() > 0.0);
        let warned = j["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w.as_str().unwrap().contains("Kramers-Kronig"));
        assert_eq!(warned, !valid, "{j}");
    }
}

/// A given noise level is used, and wrong settings and files are refused
/// with exit 2 and nothing written.
#[test]
fn settings_and_bad_input() {
    let dir = tempdir();
    let input = dir.path().join("zarc.csv");
    std::fs::write(&input, drifting_zarc_csv(1.0)).unwrap();
    let out = dir.path().join("out");
    // Told that the noise is 5 %, the drifting spectrum passes.
    let run = taumap(
        dir.path(),
        &[
            "kk",
            input.to_str().unwrap(),
            "--noise-rel",
            "0.05",
            "--out",
            out.to_str().unwrap(),
            "--no-plots",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.explain());
    let j = json(&out.join("summary.json"));
    assert_eq!(j["noise_source"], "given");
    assert_eq!(j["valid"], true);
    let few = dir.path().join("few.csv");
    std::fs::write(
        &few,
        "frequency_hz,z_re_ohm,z_im_ohm\n1,2,-1\n10,2,-1\n100,2,-1\n1000,2,-1\n10000,2,-1\n100000,2,-1\n",
    )
    .unwrap();
    for (args, needle) in [
        (vec!["kk", "zarc.csv", "--noise-rel", "-1"], "noise-rel"),
        (vec!["kk", "missing.csv"], "missing.csv"),
        (vec!["kk", "few.csv"], "at least 8 frequencies"),
    ] {
        let fresh = dir.path().join("fresh");
        let mut a = args.clone();
        a.extend(["--out", fresh.to_str().unwrap()]);
        let run = taumap(dir.path(), &a);
        assert_eq!(run.code, 2, "{}", run.explain());
        assert!(run.stderr.starts_with("error: "), "{}", run.explain());
        assert!(run.stderr.contains(needle), "{}", run.explain());
        assert!(!fresh.exists(), "{}", run.explain());
    }
}

/// `kk` and `invert` into the same folder never leave a mix: each removes
/// the other's files.
#[test]
fn kk_and_invert_do_not_mix_outputs() {
    let dir = tempdir();
    let input = repo_root().join("demo-data/button-cell-700c.csv");
    let out = dir.path().join("out");
    let o = out.to_str().unwrap();
    let i = input.to_str().unwrap();
    assert_eq!(
        taumap(dir.path(), &["invert", i, "--out", o, "--no-plots"]).code,
        0
    );
    assert!(out.join("drt.csv").exists());
    assert_eq!(
        taumap(dir.path(), &["kk", i, "--out", o, "--no-plots"]).code,
        0
    );
    assert!(out.join("residuals.csv").exists());
    assert!(!out.join("drt.csv").exists());
    assert_eq!(
        taumap(dir.path(), &["invert", i, "--out", o, "--no-plots"]).code,
        0
    );
    assert!(!out.join("residuals.csv").exists());
}
