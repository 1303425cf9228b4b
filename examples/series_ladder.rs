//! The lambda policies of a series compared on synthetic series with known
//! trends (the evidence behind the default of `taumap track`; see
//! docs/series.md).
//!
//! Run: `cargo run --release --example series_ladder [a] [b] [c] [d]
//! [runtime] [seeds=N]` (without case letters: every case and the runtime
//! rows). Every spectrum's noise has a fixed seed, the same for both
//! policies, so the tables are reproducible and the comparison is paired.
//! `LADDER_VERBOSE=1` lists the runs whose persistent tracks are not the
//! true processes, one each.
//!
//! Cases (1e-2 to 1e6 Hz, 10 points per decade, 81 frequencies):
//!
//! - a: 12 spectra (labels: cycles 0, 100, ..., 1100); 10 ohm + ZARC
//!   (20 ohm, 1e-4 s, phi 0.9, fixed) + ZARC (phi 0.9) whose tau doubles
//!   from 1e-2 s and whose R grows 30 % from 40 ohm, both linearly in the
//!   label (log10 tau and R are straight lines in it).
//! - b: as a with phi 0.8 for both, the fixed process 1.5 decades faster
//!   than the drifting one's start (10^-3.5 s).
//! - c: Arrhenius, 550 to 800 degC in steps of 50 K; 5 ohm + two ZARCs
//!   (phi 0.9) with tau = tau0 exp(Ea/(k_B T)) and R = R0 exp(Ea/(k_B T)),
//!   Ea 0.6 eV (1e-5 s, 5 ohm at 800 degC) and 1.1 eV (10^-3.4 s, 10 ohm
//!   at 800 degC): 1.6 decades apart at 800 degC, 2.3 at 550 degC.
//! - d: as a, plus a third ZARC (1 s, phi 0.9) absent from the first six
//!   spectra and growing linearly from 1/6 to 6/6 of 4 ohm (20 % of the
//!   fixed process) over the last six.

use std::time::Instant;

use taumap::io::Spectrum;
use taumap::series::{
    K_B_EV_PER_K, LambdaPolicy, SeriesParams, TemperatureUnit, Trend, fit_line, track_series,
};
use taumap::synth::{Element, Series, add_noise, log_frequencies};

/// Noise levels (fraction of |Z|, proportional Gaussian).
const NOISES: [f64; 2] = [0.001, 0.01];
/// Noisy series per case and noise level (default).
const SEEDS: usize = 30;
/// A track is the image of a true process when its median tau lies within
/// this distance (decades) of the process's tau, averaged over its points
/// (the peak maximum of a small, broad peak scatters by half a decade at
/// 1 % noise; the median, which the trends use, does not).
const MATCH_DECADES: f64 = 0.3;

/// What a process does along the series (which metrics it feeds).
#[derive(Clone, Copy, Debug, PartialEq)]
enum Role {
    /// Fixed tau and R: the scatter of its R.
    Fixed,
    /// Linear trends in the label: slope errors.
    Drift,
    /// Absent, then growing: detection and R slope.
    Emerging,
    /// Arrhenius in the temperature: activation energy errors.
    Thermal {
        /// True activation energy of tau and R (eV).
        ea_ev: f64,
    },
}

/// One true process: its tau and R in every spectrum (R 0: absent).
struct Process {
    role: Role,
    phi: f64,
    tau_s: Vec<f64>,
    r_ohm: Vec<f64>,
}

struct Case {
    key: &'static str,
    name: &'static str,
    labels: Vec<f64>,
    temperature: Option<TemperatureUnit>,
    r_inf_ohm: f64,
    processes: Vec<Process>,
}

impl Case {
    fn spectra(&self) -> usize {
        self.labels.len()
    }

    fn cell(&self, k: usize) -> Series {
        let mut e = vec![Element::Resistor {
            r_ohm: self.r_inf_ohm,
        }];
        for p in &self.processes {
            if p.r_ohm[k] > 0.0 {
                e.push(Element::Zarc {
                    r_ohm: p.r_ohm[k],
                    tau_s: p.tau_s[k],
                    phi: p.phi,
                });
            }
        }
        Series(e)
    }
}

/// Cases a, b and d: a drifting process and a fixed faster one, over
/// `n` spectra labelled in cycles.
fn cycling(
    key: &'static str,
    name: &'static str,
    n: usize,
    phi: f64,
    fixed_tau_s: f64,
    emerging: bool,
) -> Case {
    let labels: Vec<f64> = (0..n).map(|k| 100.0 * k as f64).collect();
    let frac = |k: usize| k as f64 / (n - 1) as f64;
    let mut processes = vec![
        Process {
            role: Role::Fixed,
            phi,
            tau_s: vec![fixed_tau_s; n],
            r_ohm: vec![20.0; n],
        },
        Process {
            role: Role::Drift,
            phi,
            tau_s: (0..n).map(|k| 1e-2 * 2f64.powf(frac(k))).collect(),
            r_ohm: (0..n).map(|k| 40.0 * (1.0 + 0.3 * frac(k))).collect(),
        },
    ];
    if emerging {
        let half = n / 2;
        processes.push(Process {
            role: Role::Emerging,
            phi,
            tau_s: vec![1.0; n],
            r_ohm: (0..n)
                .map(|k| {
                    if k < half {
                        0.0
                    } else {
                        4.0 * (k + 1 - half) as f64 / (n - half) as f64
                    }
                })
                .collect(),
        });
    }
    Case {
        key,
        name,
        labels,
        temperature: None,
        r_inf_ohm: 10.0,
        processes,
    }
}

fn arrhenius_case() -> Case {
    let labels: Vec<f64> = (0..6).map(|i| 550.0 + 50.0 * i as f64).collect();
    let t_ref_k = 800.0 + 273.15;
    let thermal = |ea_ev: f64, tau_ref_s: f64, r_ref_ohm: f64| {
        let f = |t_c: f64| (ea_ev / K_B_EV_PER_K * (1.0 / (t_c + 273.15) - 1.0 / t_ref_k)).exp();
        Process {
            role: Role::Thermal { ea_ev },
            phi: 0.9,
            tau_s: labels.iter().map(|&t| tau_ref_s * f(t)).collect(),
            r_ohm: labels.iter().map(|&t| r_ref_ohm * f(t)).collect(),
        }
    };
    Case {
        key: "c",
        name: "c: Arrhenius 0.6/1.1 eV",
        temperature: Some(TemperatureUnit::Celsius),
        r_inf_ohm: 5.0,
        processes: vec![
            thermal(0.6, 1e-5, 5.0),
            thermal(1.1, 10f64.powf(-3.4), 10.0),
        ],
        labels,
    }
}

fn cases() -> Vec<Case> {
    vec![
        cycling("a", "a: 2 ZARC 0.9, 2 dec", 12, 0.9, 1e-4, false),
        cycling(
            "b",
            "b: 2 ZARC 0.8, 1.5 dec",
            12,
            0.8,
            10f64.powf(-3.5),
            false,
        ),
        arrhenius_case(),
        cycling("d", "d: a + 3rd from half", 12, 0.9, 1e-4, true),
    ]
}

/// The spectra of one noisy series (`run`-th seed set).
fn make_series(case: &Case, case_no: u64, noise_no: u64, noise: f64, run: u64) -> Vec<Spectrum> {
    let f = log_frequencies(1e-2, 1e6, 10.0);
    (0..case.spectra())
        .map(|k| {
            let (mut re, mut im) = case.cell(k).sample(&f);
            let seed = 1_000_000 * case_no + 100_000 * noise_no + 1000 * run + k as u64;
            add_noise(&mut re, &mut im, noise, seed);
            Spectrum::new(f.clone(), re, im).expect("synthetic spectrum is valid")
        })
        .collect()
}

/// A persistent track: its trend and its points as (spectrum,
/// tau_median_s, r_ohm).
type Track = (Trend, Vec<(usize, f64, f64)>);

/// One run's persistent tracks.
fn track_points(run: &taumap::series::SeriesResult) -> Vec<Track> {
    run.trends
        .iter()
        .map(|t| {
            let pts = run
                .tracks
                .points
                .iter()
                .filter(|p| p.persistent && p.track == t.track)
                .map(|p| (p.spectrum, p.tau_median_s, p.r_ohm))
                .collect();
            (t.clone(), pts)
        })
        .collect()
}

/// Which track (index) is the image of each true process: nearest first,
/// one track per process, within [`MATCH_DECADES`].
fn match_tracks(case: &Case, tracks: &[Track]) -> Vec<Option<usize>> {
    let mut pairs: Vec<(f64, usize, usize)> = Vec::new();
    for (pi, p) in case.processes.iter().enumerate() {
        for (ti, (_, pts)) in tracks.iter().enumerate() {
            let d: Vec<f64> = pts
                .iter()
                .filter(|(k, _, _)| p.r_ohm[*k] > 0.0)
                .map(|(k, tau, _)| (tau / p.tau_s[*k]).log10().abs())
                .collect();
            if d.is_empty() {
                continue;
            }
            let mean = d.iter().sum::<f64>() / d.len() as f64;
            if mean <= MATCH_DECADES {
                pairs.push((mean, pi, ti));
            }
        }
    }
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut out = vec![None; case.processes.len()];
    let mut taken = vec![false; tracks.len()];
    for (_, pi, ti) in pairs {
        if out[pi].is_none() && !taken[ti] {
            out[pi] = Some(ti);
            taken[ti] = true;
        }
    }
    out
}

/// Mean and largest of `v` (NaN when empty).
fn mean_max(v: &[f64]) -> (f64, f64) {
    if v.is_empty() {
        return (f64::NAN, f64::NAN);
    }
    (
        v.iter().sum::<f64>() / v.len() as f64,
        v.iter().copied().fold(f64::MIN, f64::max),
    )
}

/// Two-sided p-value of the sign test (ties left out): the probability,
/// with no difference between the policies, of a split at least as uneven
/// as `a` to `b` (binomial with p = 1/2; W. J. Conover, *Practical
/// Nonparametric Statistics*, 3rd ed., Wiley 1999, section 3.4, section
/// number from memory).
fn sign_test(a: usize, b: usize) -> f64 {
    let n = a + b;
    if n == 0 {
        return 1.0;
    }
    // P(X <= min(a, b)) for X ~ Binomial(n, 1/2), terms built up as ratios.
    let mut term = 0.5f64.powi(n as i32);
    let mut tail = 0.0;
    for i in 0..=a.min(b) {
        tail += term;
        term *= (n - i) as f64 / (i + 1) as f64;
    }
    (2.0 * tail).min(1.0)
}

/// A p-value as printed: three decimals, or "< 0.001".
fn p_value(p: f64) -> String {
    if p < 1e-3 {
        "< 0.001".into()
    } else {
        format!("{p:.3}")
    }
}

/// Relative error of a slope against the truth.
fn rel_err(got: f64, want: f64) -> f64 {
    ((got - want) / want).abs()
}

#[derive(Default)]
struct Cell {
    runs: usize,
    right_count: usize,
    /// Runs with the right count and every true process matched to a
    /// track of its own.
    right_tracks: usize,
    failed_inversions: usize,
    /// |relative error| of the log10-tau and R slopes of the drifting
    /// process, per matched run.
    tau_slope: Vec<f64>,
    r_slope: Vec<f64>,
    drift_expected: usize,
    drift_matched: usize,
    /// |Ea error| (eV) from tau and from R, both processes.
    ea_tau: Vec<f64>,
    ea_r: Vec<f64>,
    thermal_expected: usize,
    thermal_matched: usize,
    /// std/mean of the fixed process's R along the series.
    fixed_scatter: Vec<f64>,
    /// The emerging process: matched runs, R slope errors, first spectrum.
    emerging_expected: usize,
    emerging_matched: usize,
    emerging_r_slope: Vec<f64>,
    emerging_first: Vec<usize>,
    /// ln lambda of every spectrum's inversion.
    ln_lambda: Vec<f64>,
    seconds: f64,
    spectra: usize,
    /// Per run, for the paired comparison: |log10-tau slope error|, |R
    /// slope error| of the drifting process, the fixed process's R
    /// scatter, the mean |Ea error| (`None` where not measured).
    paired: Vec<[Option<f64>; PAIRED]>,
}

/// Metrics compared run by run between the policies.
const PAIRED: usize = 4;
/// Their names in the paired table.
const PAIRED_NAMES: [&str; PAIRED] = [
    "log10-tau slope err",
    "R slope err",
    "fixed R std/mean",
    "mean Ea err",
];

/// Runs one series with `policy` into `cell`; returns whether the
/// persistent tracks are the true processes, one each, and a line
/// describing them.
fn evaluate(
    case: &Case,
    spectra: &[Spectrum],
    policy: LambdaPolicy,
    cell: &mut Cell,
) -> (bool, String) {
    let mut params = SeriesParams {
        lambda_policy: policy,
        temperature: case.temperature,
        ..SeriesParams::default()
    };
    // LADDER_PENALTY=global: the global penalty alone (no adaptive
    // refinement), for the comparison of docs/series.md.
    if std::env::var("LADDER_PENALTY").is_ok_and(|v| v == "global") {
        params.invert.drt.adaptive = None;
    }
    // LADDER_ADAPTIVE_ITER=N: at most N weighted solves of the adaptive
    // penalty (default 10).
    if let (Some(a), Some(n)) = (
        params.invert.drt.adaptive.as_mut(),
        std::env::var("LADDER_ADAPTIVE_ITER")
            .ok()
            .and_then(|v| v.parse().ok()),
    ) {
        a.max_iter = n;
    }
    let start = Instant::now();
    let run = track_series(spectra, &case.labels, &params).expect("the series runs");
    cell.seconds += start.elapsed().as_secs_f64();
    cell.spectra += spectra.len();
    cell.runs += 1;
    for inv in &run.inversions {
        match inv {
            Ok(inv) => cell.ln_lambda.push(inv.drt.lambda.lambda.ln()),
            Err(_) => cell.failed_inversions += 1,
        }
    }
    let tracks = track_points(&run);
    if tracks.len() == case.processes.len() {
        cell.right_count += 1;
    }
    let matched = match_tracks(case, &tracks);
    let all_matched = matched.iter().all(Option::is_some);
    if tracks.len() == case.processes.len() && all_matched {
        cell.right_tracks += 1;
    }
    let x = &case.labels;
    let mut rec: [Option<f64>; PAIRED] = [None; PAIRED];
    let mut ea_errs: Vec<f64> = Vec::new();
    for (p, m) in case.processes.iter().zip(&matched) {
        let present: Vec<usize> = (0..case.spectra()).filter(|&k| p.r_ohm[k] > 0.0).collect();
        let xs: Vec<f64> = present.iter().map(|&k| x[k]).collect();
        let true_tau_slope = fit_line(
            &xs,
            &present
                .iter()
                .map(|&k| p.tau_s[k].log10())
                .collect::<Vec<f64>>(),
        )
        .map(|l| l.slope);
        let true_r_slope = fit_line(
            &xs,
            &present.iter().map(|&k| p.r_ohm[k]).collect::<Vec<f64>>(),
        )
        .map(|l| l.slope);
        let found = m.map(|ti| &tracks[ti]);
        match p.role {
            Role::Fixed => {
                if let Some((_, pts)) = found {
                    let r: Vec<f64> = pts.iter().map(|q| q.2).collect();
                    let mean = r.iter().sum::<f64>() / r.len() as f64;
                    let var = r.iter().map(|v| (v - mean).powi(2)).sum::<f64>()
                        / (r.len() as f64 - 1.0).max(1.0);
                    cell.fixed_scatter.push(var.sqrt() / mean);
                    rec[2] = Some(var.sqrt() / mean);
                }
            }
            Role::Drift => {
                cell.drift_expected += 1;
                if let Some((t, _)) = found {
                    cell.drift_matched += 1;
                    if let (Some(l), Some(w)) = (t.log10_tau_line, true_tau_slope) {
                        cell.tau_slope.push(rel_err(l.slope, w));
                        rec[0] = Some(rel_err(l.slope, w));
                    }
                    if let (Some(l), Some(w)) = (t.r_line, true_r_slope) {
                        cell.r_slope.push(rel_err(l.slope, w));
                        rec[1] = Some(rel_err(l.slope, w));
                    }
                }
            }
            Role::Emerging => {
                cell.emerging_expected += 1;
                if let Some((t, _)) = found {
                    cell.emerging_matched += 1;
                    cell.emerging_first.push(t.first_spectrum);
                    if let (Some(l), Some(w)) = (t.r_line, true_r_slope) {
                        cell.emerging_r_slope.push(rel_err(l.slope, w));
                    }
                }
            }
            Role::Thermal { ea_ev } => {
                cell.thermal_expected += 1;
                if let Some((t, _)) = found {
                    cell.thermal_matched += 1;
                    if let Some(a) = t.ea_tau {
                        cell.ea_tau.push((a.ea_ev - ea_ev).abs());
                        ea_errs.push((a.ea_ev - ea_ev).abs());
                    }
                    if let Some(a) = t.ea_r {
                        cell.ea_r.push((a.ea_ev - ea_ev).abs());
                        ea_errs.push((a.ea_ev - ea_ev).abs());
                    }
                }
            }
        }
    }
    if !ea_errs.is_empty() {
        rec[3] = Some(ea_errs.iter().sum::<f64>() / ea_errs.len() as f64);
    }
    cell.paired.push(rec);
    // A line for the verbose listing.
    let line = tracks
        .iter()
        .map(|(t, pts)| {
            format!(
                "#{} {}pts {:.2}..{:.2} dec {:.1}..{:.1} ohm",
                t.track,
                pts.len(),
                t.tau_first_s.log10(),
                t.tau_last_s.log10(),
                t.r_first_ohm,
                t.r_last_ohm
            )
        })
        .collect::<Vec<String>>()
        .join("; ");
    (tracks.len() == case.processes.len() && all_matched, line)
}

fn policy_name(p: LambdaPolicy) -> &'static str {
    match p {
        LambdaPolicy::Each => "each",
        LambdaPolicy::Series => "series",
    }
}

fn pct(v: f64) -> String {
    if v.is_nan() {
        "-".into()
    } else {
        format!("{:.1}", 100.0 * v)
    }
}

fn ev(v: f64) -> String {
    if v.is_nan() {
        "-".into()
    } else {
        format!("{v:.3}")
    }
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let seeds = args
        .iter()
        .find_map(|a| a.strip_prefix("seeds=").and_then(|v| v.parse().ok()))
        .unwrap_or(SEEDS);
    let keys: Vec<&str> = args
        .iter()
        .map(String::as_str)
        .filter(|a| !a.starts_with("seeds="))
        .collect();
    let wanted = |k: &str| keys.is_empty() || keys.contains(&k);
    let verbose = std::env::var_os("LADDER_VERBOSE").is_some();
    let policies = [LambdaPolicy::Each, LambdaPolicy::Series];
    println!(
        "{seeds} noisy series per case and noise level; {} threads",
        rayon::current_num_threads()
    );
    let mut cycling_rows: Vec<String> = Vec::new();
    let mut arrhenius_rows: Vec<String> = Vec::new();
    let mut emerging_rows: Vec<String> = Vec::new();
    let mut paired_rows: Vec<String> = Vec::new();
    for (case_no, case) in cases().iter().enumerate() {
        if !wanted(case.key) {
            continue;
        }
        for (noise_no, &noise) in NOISES.iter().enumerate() {
            let mut cells: Vec<Cell> = policies.iter().map(|_| Cell::default()).collect();
            for run in 0..seeds as u64 {
                let spectra = make_series(case, case_no as u64, noise_no as u64, noise, run);
                // Alternate the order so neither policy always runs on a
                // warm cache.
                let order: Vec<usize> = if run % 2 == 0 { vec![0, 1] } else { vec![1, 0] };
                for pi in order {
                    let (right, line) = evaluate(case, &spectra, policies[pi], &mut cells[pi]);
                    if verbose && !right {
                        eprintln!(
                            "{} noise={noise} run={run} {}: {line}",
                            case.key,
                            policy_name(policies[pi])
                        );
                    }
                }
            }
            for (m, name) in PAIRED_NAMES.iter().enumerate() {
                let (mut series_less, mut each_less, mut ties) = (0, 0, 0);
                for (e, s) in cells[0].paired.iter().zip(&cells[1].paired) {
                    if let (Some(e), Some(s)) = (e[m], s[m]) {
                        match s.total_cmp(&e) {
                            std::cmp::Ordering::Less => series_less += 1,
                            std::cmp::Ordering::Greater => each_less += 1,
                            std::cmp::Ordering::Equal => ties += 1,
                        }
                    }
                }
                if series_less + each_less + ties > 0 {
                    paired_rows.push(format!(
                        "| {} | {}% | {name} | {series_less} | {each_less} | {ties} | {} |",
                        case.key,
                        100.0 * noise,
                        p_value(sign_test(series_less, each_less))
                    ));
                }
            }
            for (pi, c) in cells.iter().enumerate() {
                let mut ln = c.ln_lambda.clone();
                ln.sort_by(f64::total_cmp);
                let lam = if ln.is_empty() {
                    "-".into()
                } else {
                    format!(
                        "{:.1e} ({:.1e}..{:.1e})",
                        ln[ln.len() / 2].exp(),
                        ln[0].exp(),
                        ln[ln.len() - 1].exp()
                    )
                };
                let failed = if c.failed_inversions > 0 {
                    format!(" ({} failed)", c.failed_inversions)
                } else {
                    String::new()
                };
                let head = format!(
                    "| {} | {}% | {}{failed} | {lam} | {}/{} | {}/{} |",
                    case.name,
                    100.0 * noise,
                    policy_name(policies[pi]),
                    c.right_count,
                    c.runs,
                    c.right_tracks,
                    c.runs,
                );
                let ms = 1e3 * c.seconds / c.spectra.max(1) as f64;
                if c.thermal_expected > 0 {
                    let (et_m, et_w) = mean_max(&c.ea_tau);
                    let (er_m, er_w) = mean_max(&c.ea_r);
                    arrhenius_rows.push(format!(
                        "{head} {}/{} | {} / {} | {} / {} | {ms:.1} |",
                        c.thermal_matched,
                        c.thermal_expected,
                        ev(et_m),
                        ev(et_w),
                        ev(er_m),
                        ev(er_w),
                    ));
                } else {
                    let (ts_m, ts_w) = mean_max(&c.tau_slope);
                    let (rs_m, rs_w) = mean_max(&c.r_slope);
                    let (fs_m, fs_w) = mean_max(&c.fixed_scatter);
                    cycling_rows.push(format!(
                        "{head} {}/{} | {} / {} | {} / {} | {} / {} | {ms:.1} |",
                        c.drift_matched,
                        c.drift_expected,
                        pct(ts_m),
                        pct(ts_w),
                        pct(rs_m),
                        pct(rs_w),
                        pct(fs_m),
                        pct(fs_w),
                    ));
                }
                if c.emerging_expected > 0 {
                    let (m, w) = mean_max(&c.emerging_r_slope);
                    let mut first = c.emerging_first.clone();
                    first.sort_unstable();
                    let first = if first.is_empty() {
                        "-".into()
                    } else {
                        format!(
                            "{} ({}..{})",
                            first[first.len() / 2],
                            first[0],
                            first[first.len() - 1]
                        )
                    };
                    emerging_rows.push(format!(
                        "| {}% | {} | {}/{} | {first} | {} / {} |",
                        100.0 * noise,
                        policy_name(policies[pi]),
                        c.emerging_matched,
                        c.emerging_expected,
                        pct(m),
                        pct(w)
                    ));
                }
            }
        }
    }
    if !cycling_rows.is_empty() {
        println!();
        println!("Cases a, b, d: slopes against the label (cycles), the fixed process's R:");
        println!();
        println!(
            "| case | noise | policy | lambda median (range) | right track count | right tracks | \
             drift matched | log10-tau slope err mean / worst (%) | \
             R slope err mean / worst (%) | fixed R std/mean mean / worst (%) | \
             ms per spectrum |"
        );
        println!("|---|---|---|---|---|---|---|---|---|---|---|");
        for r in cycling_rows {
            println!("{r}");
        }
    }
    if !arrhenius_rows.is_empty() {
        println!();
        println!("Case c: activation energies of both processes (both fits, tau and R):");
        println!();
        println!(
            "| case | noise | policy | lambda median (range) | right track count | right tracks | \
             processes matched | Ea err from tau mean / worst (eV) | \
             Ea err from R mean / worst (eV) | ms per spectrum |"
        );
        println!("|---|---|---|---|---|---|---|---|---|---|");
        for r in arrhenius_rows {
            println!("{r}");
        }
    }
    if !paired_rows.is_empty() {
        println!();
        println!("Paired by noise seed: the runs in which each policy has the smaller error:");
        println!();
        println!("| case | noise | metric | series smaller | each smaller | equal | sign test p |");
        println!("|---|---|---|---|---|---|---|");
        for r in paired_rows {
            println!("{r}");
        }
    }
    if !emerging_rows.is_empty() {
        println!();
        println!("Case d, the process that appears halfway (true: spectra 6 to 11):");
        println!();
        println!(
            "| noise | policy | followed (persistent track) | first spectrum median (range) | \
             R slope err mean / worst (%) |"
        );
        println!("|---|---|---|---|---|");
        for r in emerging_rows {
            println!("{r}");
        }
    }
    if wanted("runtime") {
        runtime(&policies);
    }
}

/// Time per spectrum on a long series, where the pilot of the series
/// policy is 16 of its spectra.
fn runtime(policies: &[LambdaPolicy]) {
    const N: usize = 192;
    let case = cycling("a", "a, long", N, 0.9, 1e-4, false);
    let spectra = make_series(&case, 9, 1, 0.01, 0);
    println!();
    println!("Runtime on a long series (case a over {N} spectra, 1 % noise, one seed):");
    println!();
    println!("| policy | wall time (s) | ms per spectrum | tracks are the true processes |");
    println!("|---|---|---|---|");
    for &p in policies {
        let mut c = Cell::default();
        let (right, _) = evaluate(&case, &spectra, p, &mut c);
        println!(
            "| {} | {:.2} | {:.1} | {} |",
            policy_name(p),
            c.seconds,
            1e3 * c.seconds / c.spectra as f64,
            if right { "yes" } else { "no" }
        );
    }
}
