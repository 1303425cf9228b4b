//! Bad input: a clear `error: FILE:LINE: ...`, exit code 2, no panic, and no
//! output written or lost.

use crate::util::{assert_clean_failure, taumap, tempdir, voigt_csv};

/// Writes `text` as `bad.csv`, runs `taumap invert bad.csv`, and checks the
/// three things every error must satisfy.
fn expect_error(text: &str, needle: &str) -> crate::util::Run {
    let dir = tempdir();
    std::fs::write(dir.path().join("bad.csv"), text).unwrap();
    let run = taumap(dir.path(), &["invert", "bad.csv"]);
    assert_clean_failure(&run, needle, dir.path(), "bad-taumap");
    run
}

const HEAD: &str = "frequency_hz,z_re_ohm,z_im_ohm\n";
const ROWS: &str = "1,10,-1\n10,9,-2\n100,8,-3\n1000,7,-2\n10000,6,-1\n";

#[test]
fn non_numeric_value_names_line_and_column() {
    let text = format!("{HEAD}1,10,-1\n10,9,-2\n100,abc,-3\n1000,7,-2\n10000,6,-1\n");
    let run = expect_error(&text, "bad.csv:4:");
    assert!(run.stderr.contains("\"abc\""), "{}", run.explain());
    assert!(run.stderr.contains("z_re_ohm"), "{}", run.explain());
}

#[test]
fn non_finite_value_is_rejected() {
    let text = format!("{HEAD}1,10,-1\n10,9,-2\n100,8,nan\n1000,7,-2\n10000,6,-1\n");
    expect_error(&text, "bad.csv:4:");
    let text = format!("{HEAD}1,10,-1\n10,inf,-2\n100,8,-3\n1000,7,-2\n10000,6,-1\n");
    expect_error(&text, "bad.csv:3:");
}

#[test]
fn non_positive_frequency_is_rejected() {
    let text = format!("{HEAD}0,10,-1\n10,9,-2\n100,8,-3\n1000,7,-2\n10000,6,-1\n");
    expect_error(&text, "bad.csv:2:");
    let text = format!("{HEAD}-5,10,-1\n10,9,-2\n100,8,-3\n1000,7,-2\n10000,6,-1\n");
    expect_error(&text, "bad.csv:2:");
}

#[test]
fn duplicate_frequency_names_both_lines() {
    let text = format!("{HEAD}1,10,-1\n10,9,-2\n100,8,-3\n10,7,-2\n10000,6,-1\n");
    let run = expect_error(&text, "duplicate frequency");
    assert!(run.stderr.contains("bad.csv:5:"), "{}", run.explain());
    assert!(run.stderr.contains("line 3"), "{}", run.explain());
}

#[test]
fn too_few_points() {
    let text = format!("{HEAD}1,10,-1\n10,9,-2\n100,8,-3\n1000,7,-2\n");
    let run = expect_error(&text, "bad.csv");
    assert!(run.stderr.contains("at least 5"), "{}", run.explain());
    assert!(run.stderr.contains("found 4"), "{}", run.explain());
}

#[test]
fn missing_column_is_reported_at_the_header() {
    let run = expect_error(
        "frequency_hz,z_re_ohm\n1,10\n2,9\n3,8\n4,7\n5,6\n",
        "bad.csv:1:",
    );
    assert!(
        run.stderr.to_lowercase().contains("imaginary"),
        "{}",
        run.explain()
    );
}

#[test]
fn wrong_field_count_and_empty_file() {
    let text = format!("{HEAD}1,10,-1\n10,9\n100,8,-3\n1000,7,-2\n10000,6,-1\n");
    expect_error(&text, "bad.csv:3:");
    expect_error("", "bad.csv:1:");
    expect_error("\u{feff}\n\n# only comments\n", "bad.csv");
}

#[test]
fn binary_garbage_does_not_panic() {
    let dir = tempdir();
    std::fs::write(
        dir.path().join("bad.csv"),
        [0xff, 0xfe, 0x00, 0x41, 0x0a, 0x80],
    )
    .unwrap();
    let run = taumap(dir.path(), &["invert", "bad.csv"]);
    assert_eq!(run.code, 2, "{}", run.explain());
    assert!(
        run.stderr.starts_with("error: bad.csv"),
        "{}",
        run.explain()
    );
    assert!(!run.stderr.contains("panicked"));
}

#[test]
fn missing_file_and_bad_options() {
    let dir = tempdir();
    let run = taumap(dir.path(), &["invert", "nowhere.csv"]);
    assert_eq!(run.code, 2, "{}", run.explain());
    assert!(
        run.stderr.starts_with("error: nowhere.csv"),
        "{}",
        run.explain()
    );

    std::fs::write(dir.path().join("ok.csv"), format!("{HEAD}{ROWS}")).unwrap();
    for (args, needle) in [
        (vec!["invert", "ok.csv", "--lambda=-1"], "--lambda"),
        (
            vec!["invert", "ok.csv", "--lambda", "sometimes"],
            "--lambda",
        ),
        (
            vec!["invert", "ok.csv", "--penalty-order", "3"],
            "penalty-order",
        ),
        (vec!["invert", "ok.csv", "--per-decade", "0"], "per-decade"),
        (vec!["invert", "ok.csv", "--tau-min=-1"], "tau-min"),
        (
            vec!["invert", "ok.csv", "--basis", "hat", "--penalty-order", "2"],
            "penalty order 2",
        ),
    ] {
        let run = taumap(dir.path(), &args);
        assert_eq!(run.code, 2, "{}", run.explain());
        assert!(
            run.stderr.contains(needle),
            "wanted {needle:?}\n{}",
            run.explain()
        );
        assert!(!run.stderr.contains("panicked"));
    }
}

/// A failed run leaves earlier results intact: outputs are staged and
/// committed only after everything succeeded.
#[test]
fn failed_run_keeps_previous_results() {
    let dir = tempdir();
    std::fs::write(dir.path().join("cell.csv"), voigt_csv()).unwrap();
    let ok = taumap(
        dir.path(),
        &["invert", "cell.csv", "--out", "res", "--no-plots"],
    );
    assert_eq!(ok.code, 0, "{}", ok.explain());
    let before = std::fs::read(dir.path().join("res/summary.json")).unwrap();
    std::fs::write(
        dir.path().join("cell.csv"),
        "frequency_hz,z_re_ohm,z_im_ohm\n1,2\n",
    )
    .unwrap();
    let bad = taumap(dir.path(), &["invert", "cell.csv", "--out", "res"]);
    assert_eq!(bad.code, 2, "{}", bad.explain());
    assert_eq!(
        std::fs::read(dir.path().join("res/summary.json")).unwrap(),
        before
    );
    let names: Vec<String> = std::fs::read_dir(dir.path().join("res"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(
        names.iter().all(|n| !n.starts_with('.')),
        "no temporaries left: {names:?}"
    );
}

/// A 100 000-character field is quoted by its head and length, not echoed.
#[test]
fn a_huge_field_is_quoted_short() {
    let long = "x".repeat(100_000);
    let text = format!("{HEAD}1,{long},-1\n{ROWS}");
    let run = expect_error(&text, "bad.csv:2:");
    assert!(
        run.stderr.contains("(100000 characters)"),
        "{}",
        run.explain()
    );
    assert!(
        run.stderr.len() < 400,
        "stderr holds {} bytes",
        run.stderr.len()
    );
}

/// `--out` naming a file says so, instead of "File exists (os error 17)".
#[test]
fn output_folder_that_is_a_file() {
    let dir = tempdir();
    std::fs::write(dir.path().join("ok.csv"), format!("{HEAD}{ROWS}")).unwrap();
    std::fs::write(dir.path().join("taken"), "a file").unwrap();
    let run = taumap(
        dir.path(),
        &["invert", "ok.csv", "--out", "taken", "--no-plots"],
    );
    assert_eq!(run.code, 2, "{}", run.explain());
    assert!(
        run.stderr.contains("taken: is a file, not a folder"),
        "{}",
        run.explain()
    );
    assert_eq!(
        std::fs::read_to_string(dir.path().join("taken")).unwrap(),
        "a file"
    );
}

/// A logger clock that did not start at the step: the error points at
/// --step-time.
#[test]
fn late_clock_suggests_step_time() {
    let dir = tempdir();
    let mut text = String::from("time_s,voltage_v\n");
    for k in 0..2000 {
        text.push_str(&format!("{:.3},{}\n", 100.0 + 0.01 * k as f64, 1.0));
    }
    std::fs::write(dir.path().join("clock.csv"), text).unwrap();
    let run = taumap(
        dir.path(),
        &["transient", "clock.csv", "--current-step-a", "0.1"],
    );
    assert_clean_failure(&run, "clock.csv:1:", dir.path(), "clock-taumap");
    assert!(run.stderr.contains("--step-time"), "{}", run.explain());
}
