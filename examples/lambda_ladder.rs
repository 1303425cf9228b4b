//! Accuracy benchmark of the lambda rules on synthetic spectra with analytical
//! DRTs (the evidence behind the default rule; see docs/lambda-rules.md).
//!
//! Run: `cargo run --release --example lambda_ladder [penalty orders...]`
//! Prints a Markdown table. Seeds are fixed, so the table is reproducible.

use taumap::pipeline::{DrtOptions, InvertParams, LambdaChoice, LambdaRule, invert};
use taumap::synth::{Series, cells, reference_spectrum};

struct Case {
    name: &'static str,
    cell: Series,
    /// Expected peaks (tau_s); for the Warburg case only the slowest line is checked.
    peaks_tau_s: Vec<f64>,
    first_only: bool,
}

fn ladder() -> Vec<Case> {
    vec![
        Case {
            name: "Voigt",
            cell: cells::voigt(),
            peaks_tau_s: vec![1e-3],
            first_only: false,
        },
        Case {
            name: "ZARC phi=0.8",
            cell: cells::zarc(),
            peaks_tau_s: vec![1e-3],
            first_only: false,
        },
        Case {
            name: "2 ZARC, 1 decade",
            cell: cells::two_zarcs(),
            peaks_tau_s: vec![1e-4, 1e-3],
            first_only: false,
        },
        Case {
            name: "ZARC + Voigt",
            cell: cells::zarc_plus_voigt(),
            peaks_tau_s: vec![1e-4, 1e-3],
            first_only: false,
        },
        Case {
            name: "finite Warburg",
            cell: cells::finite_warburg(),
            // first line tau_W/((1/2)^2 pi^2)
            peaks_tau_s: vec![1.0 / (0.25 * std::f64::consts::PI.powi(2))],
            first_only: true,
        },
    ]
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
    let seeds = [11u64, 12, 13];
    let noises = [0.001, 0.01];
    println!(
        "| order | rule | passed | peak-count ok | mean abs log10 tau error (dec) | mean abs R_pol error (%) |"
    );
    println!("|---|---|---|---|---|---|");
    for &order in &orders {
        for rule in LambdaRule::ALL {
            let (mut pass, mut count_ok, mut total) = (0, 0, 0);
            let (mut dtau, mut ntau, mut drpol) = (0.0, 0, 0.0);
            for case in ladder() {
                for &noise in &noises {
                    for &seed in &seeds {
                        let s = reference_spectrum(&case.cell, noise, seed)
                            .expect("synthetic spectrum is valid");
                        let p = InvertParams {
                            drt: DrtOptions {
                                lambda: LambdaChoice::Rule(rule),
                                penalty_order: order,
                                all_curves: rule == LambdaRule::Recv,
                                ..DrtOptions::default()
                            },
                            ..InvertParams::default()
                        };
                        let inv = invert(&s, &p).expect("inversion runs");
                        total += 1;
                        let want = case.cell.r_pol_ohm();
                        let e_rpol = (inv.drt.total - want).abs() / want;
                        drpol += e_rpol;
                        let found: Vec<f64> = if case.first_only {
                            inv.drt
                                .peaks
                                .last()
                                .map(|p| vec![p.tau_s])
                                .unwrap_or_default()
                        } else {
                            inv.drt.peaks.iter().map(|p| p.tau_s).collect()
                        };
                        let n_ok = found.len() == case.peaks_tau_s.len();
                        let mut tau_ok = n_ok;
                        if n_ok {
                            count_ok += 1;
                            for (a, b) in found.iter().zip(&case.peaks_tau_s) {
                                let d = (a / b).log10().abs();
                                dtau += d;
                                ntau += 1;
                                tau_ok &= d <= 0.1;
                            }
                        }
                        if tau_ok && e_rpol <= 0.03 {
                            pass += 1;
                        } else if std::env::var_os("LADDER_VERBOSE").is_some() {
                            let got: Vec<String> = inv
                                .drt
                                .peaks
                                .iter()
                                .map(|p| format!("{:.2}@{:.2}", p.tau_s.log10(), p.area))
                                .collect();
                            eprintln!(
                                "fail k={order} {rule} {} noise={noise} seed={seed}: {got:?}",
                                case.name
                            );
                        }
                    }
                }
            }
            println!(
                "| {order} | {} | {pass}/{total} | {count_ok}/{total} | {:.3} | {:.2} |",
                rule.name(),
                dtau / ntau.max(1) as f64,
                100.0 * drpol / total as f64
            );
        }
    }
}
