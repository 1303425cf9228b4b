//! Accuracy benchmark of transient inversion: every lambda rule and penalty
//! order on synthetic step responses with known distributions (the evidence
//! behind the transient defaults; see docs/transient-accuracy.md).
//!
//! Run: `cargo run --release --example transient_ladder [penalty orders...]
//! [global] [adaptive]` (without a penalty name, both: the global penalty
//! and the adaptive one of `--penalty adaptive`). Prints a Markdown table. Seeds are fixed, so the table is reproducible;
//! `LADDER_VERBOSE=1` lists the failures.

use taumap::pipeline::adaptive::AdaptiveOptions;
use taumap::pipeline::binning::{BinOptions, BinnedTransient};
use taumap::pipeline::{LambdaChoice, LambdaRule, StepKind, TransientParams, invert_transient};
use taumap::synth::{Element, Series, add_white_noise, cells, log_times};

struct Case {
    name: &'static str,
    cell: Series,
    step: StepKind,
    /// Expected (tau_s, weight) of each peak; a found peak's area is checked
    /// against the true distribution's mass over the found peak's window.
    peaks: Vec<(f64, f64)>,
}

fn ladder() -> Vec<Case> {
    let current = StepKind::CurrentStep { current_a: 1.0 };
    vec![
        Case {
            name: "Voigt, current step",
            cell: cells::voigt(),
            step: current,
            peaks: vec![(1e-3, 50.0)],
        },
        Case {
            name: "2 Voigt 1 decade, current step",
            cell: cells::two_voigts(),
            step: current,
            peaks: vec![(1e-3, 0.020), (1e-2, 0.030)],
        },
        Case {
            name: "2 Voigt 1 decade, relaxation",
            cell: cells::two_voigts(),
            step: StepKind::Relaxation { current_a: 1.0 },
            peaks: vec![(1e-3, 0.020), (1e-2, 0.030)],
        },
        Case {
            name: "ZARC phi=0.8, current step",
            cell: cells::zarc(),
            step: current,
            peaks: vec![(1e-3, 50.0)],
        },
        Case {
            name: "ZARC + Voigt, current step",
            cell: cells::zarc_plus_voigt(),
            step: current,
            peaks: vec![(1e-4, 20.0), (1e-3, 30.0)],
        },
        Case {
            // Series R-C under a voltage step: i/U = (1/R) e^{-t/RC}.
            name: "series R-C, voltage step",
            cell: Series(vec![Element::Voigt {
                r_ohm: 1.0 / 50.0,
                tau_s: 1e-3,
            }]),
            step: StepKind::VoltageStep { voltage_v: 1.0 },
            peaks: vec![(1e-3, 1.0 / 50.0)],
        },
    ]
}

/// The true distribution's mass between `lo` and `hi` (s): its lines there
/// plus its continuous part integrated (midpoint rule, 2000 steps).
fn true_mass(cell: &Series, lo: f64, hi: f64) -> f64 {
    let lines: f64 = cell
        .0
        .iter()
        .flat_map(|e| e.lines(1000))
        .filter(|(tau, _)| *tau >= lo && *tau < hi)
        .map(|(_, w)| w)
        .sum();
    let n = 2000;
    let (a, b) = (lo.ln(), hi.ln());
    let h = (b - a) / n as f64;
    let cont: f64 = (0..n)
        .map(|k| cell.gamma_ohm((a + (k as f64 + 0.5) * h).exp()) * h)
        .sum();
    lines + cont
}

/// The response per unit step: ohm for current steps and relaxations; for
/// the voltage-step case the "cell" holds the admittance line directly.
fn response(case: &Case, t: f64) -> f64 {
    match case.step {
        StepKind::CurrentStep { .. } => case.cell.current_step_ohm(t),
        StepKind::Relaxation { .. } | StepKind::VoltageStep { .. } => case.cell.relaxation_ohm(t),
    }
}

fn main() {
    let orders: Vec<usize> = std::env::args()
        .skip(1)
        .filter_map(|s| s.parse().ok())
        .collect();
    let orders = if orders.is_empty() {
        vec![0, 1, 2]
    } else {
        orders
    };
    let named: Vec<String> = std::env::args()
        .skip(1)
        .filter(|s| s == "global" || s == "adaptive")
        .collect();
    let penalties: Vec<&str> = ["global", "adaptive"]
        .into_iter()
        .filter(|p| named.is_empty() || named.iter().any(|n| n == p))
        .collect();
    let seeds = [21u64, 22, 23, 24, 25];
    // White noise relative to the largest response.
    let noises = [1e-3, 5e-3];
    let t = log_times(1e-6, 10.0, 60.0);
    println!(
        "| penalty | order | rule | passed | peak-count ok | mean abs log10 tau error (dec) | mean abs total error (%) |"
    );
    println!("|---|---|---|---|---|---|---|");
    for &penalty in &penalties {
        for &order in &orders {
            for rule in LambdaRule::ALL {
                let (mut pass, mut count_ok, mut total) = (0, 0, 0);
                let (mut dtau, mut ntau, mut dsum) = (0.0, 0, 0.0);
                for case in ladder() {
                    let clean: Vec<f64> = t.iter().map(|&t| response(&case, t)).collect();
                    let span = clean.iter().fold(0.0f64, |a, v| a.max(v.abs()));
                    for &noise in &noises {
                        for &seed in &seeds {
                            let mut v = clean.clone();
                            add_white_noise(&mut v, noise * span, seed);
                            let rec = BinnedTransient::from_samples(&t, &v, &BinOptions::default())
                                .expect("valid record");
                            let mut p = TransientParams::new(case.step);
                            p.drt.lambda = LambdaChoice::Rule(rule);
                            p.drt.penalty_order = order;
                            p.drt.adaptive = (penalty == "adaptive").then(AdaptiveOptions::default);
                            let inv = invert_transient(&rec, &p).expect("inversion runs");
                            total += 1;
                            let want: f64 = case.peaks.iter().map(|p| p.1).sum();
                            let e_sum = (inv.drt.total - want).abs() / want;
                            dsum += e_sum;
                            let n_ok = inv.drt.peaks.len() == case.peaks.len();
                            let mut ok = n_ok && e_sum <= 0.03;
                            if n_ok {
                                count_ok += 1;
                                for (got, (tau, _)) in inv.drt.peaks.iter().zip(&case.peaks) {
                                    let d = (got.tau_s / tau).log10().abs();
                                    dtau += d;
                                    ntau += 1;
                                    // Area against the truth over the same window.
                                    let w = true_mass(&case.cell, got.tau_lo_s, got.tau_hi_s);
                                    ok &= d <= 0.1 && (got.area / w - 1.0).abs() <= 0.05;
                                }
                            }
                            if ok {
                                pass += 1;
                            } else if std::env::var_os("LADDER_VERBOSE").is_some() {
                                let got: Vec<String> = inv
                                    .drt
                                    .peaks
                                    .iter()
                                    .map(|p| format!("{:.2}@{:.4}", p.tau_s.log10(), p.area))
                                    .collect();
                                eprintln!(
                                    "fail {penalty} k={order} {rule} {} noise={noise} seed={seed}: {got:?}",
                                    case.name
                                );
                            }
                        }
                    }
                }
                println!(
                    "| {penalty} | {order} | {} | {pass}/{total} | {count_ok}/{total} | {:.3} | {:.2} |",
                    rule.name(),
                    dtau / ntau.max(1) as f64,
                    100.0 * dsum / total as f64
                );
            }
        }
    }
}
