//! Helpers shared by the integration tests.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Command;

/// Output of one run of the binary.
pub struct Run {
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
    pub cmdline: String,
}

impl Run {
    /// Everything needed to understand a failing assertion.
    pub fn explain(&self) -> String {
        format!(
            "command: {}\nexit code: {}\nstdout:\n{}\nstderr:\n{}",
            self.cmdline, self.code, self.stdout, self.stderr
        )
    }
}

/// Runs `taumap ARGS` in `dir`.
pub fn taumap(dir: &Path, args: &[&str]) -> Run {
    let out = Command::new(env!("CARGO_BIN_EXE_taumap"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("the test binary can be started");
    Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
        cmdline: format!("taumap {}", args.join(" ")),
    }
}

/// Runs the binary like [`taumap`], but kills it and fails the test when it
/// takes longer than `limit` (a hang must fail, not stall the suite).
pub fn taumap_within(dir: &Path, args: &[&str], limit: std::time::Duration) -> Run {
    use std::io::Read;
    let mut child = Command::new(env!("CARGO_BIN_EXE_taumap"))
        .args(args)
        .current_dir(dir)
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("the test binary can be started");
    let start = std::time::Instant::now();
    let status = loop {
        if let Some(status) = child.try_wait().expect("the child can be polled") {
            break status;
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            panic!("taumap {} did not finish within {limit:?}", args.join(" "));
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
    };
    let (mut stdout, mut stderr) = (String::new(), String::new());
    if let Some(mut o) = child.stdout.take() {
        let _ = o.read_to_string(&mut stdout);
    }
    if let Some(mut e) = child.stderr.take() {
        let _ = e.read_to_string(&mut stderr);
    }
    Run {
        code: status.code().unwrap_or(-1),
        stdout,
        stderr,
        cmdline: format!("taumap {}", args.join(" ")),
    }
}

/// Checks what every failed run must show: exit code 2, a first line
/// starting `error: ` and containing `needle`, no panic, and no output
/// directory `out` in `dir`.
pub fn assert_clean_failure(run: &Run, needle: &str, dir: &Path, out: &str) {
    assert_eq!(run.code, 2, "{}", run.explain());
    assert!(run.stderr.starts_with("error: "), "{}", run.explain());
    assert!(
        run.stderr.contains(needle),
        "wanted {needle:?}\n{}",
        run.explain()
    );
    assert!(!run.stderr.contains("panicked"), "{}", run.explain());
    assert!(
        !dir.join(out).exists(),
        "no output directory on failure\n{}",
        run.explain()
    );
}

/// The repository root (for the checked-in demo data).
pub fn repo_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// A fresh temporary directory.
pub fn tempdir() -> tempfile::TempDir {
    tempfile::tempdir().expect("a temporary directory can be created")
}

/// A valid spectrum of one Voigt element (R = 50 ohm, tau = 1 ms) behind 10 ohm,
/// 0.1 Hz to 100 kHz, as CSV text.
pub fn voigt_csv() -> String {
    let mut s = String::from("frequency_hz,z_re_ohm,z_im_ohm\n");
    for i in 0..=60 {
        let f = 0.1 * 10f64.powf(i as f64 / 10.0);
        let x = 2.0 * std::f64::consts::PI * f * 1e-3;
        let re = 10.0 + 50.0 / (1.0 + x * x);
        let im = -50.0 * x / (1.0 + x * x);
        s.push_str(&format!("{f},{re},{im}\n"));
    }
    s
}
