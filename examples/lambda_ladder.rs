//! Accuracy benchmarks on synthetic spectra with analytical DRTs.
//!
//! Two ladders, each printing Markdown tables from fixed seeds, so every
//! table is reproducible:
//!
//! - `cargo run --release --example lambda_ladder [penalty orders...]`: the
//!   lambda rules compared (the evidence behind the default rule; see
//!   docs/lambda-rules.md).
//! - `cargo run --release --example lambda_ladder resolution [methods...]`:
//!   the resolution and accuracy ladder of whole inversion methods (spurious
//!   and missed peaks, peak tau, R_pol, shape of gamma, pair resolution; see
//!   docs/resolution-ladder.md). A method is a name and a function from a
//!   spectrum to its inversion; see `resolution::methods`.

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
    let args: Vec<String> = std::env::args().skip(1).collect();
    if args.first().map(String::as_str) == Some("resolution") {
        resolution::run(&args[1..]);
        return;
    }
    let orders: Vec<usize> = args.iter().filter_map(|s| s.parse().ok()).collect();
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
                                // The rules alone, with the global penalty
                                // (the adaptive one starts from their choice).
                                adaptive: None,
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

/// The resolution and accuracy ladder (docs/resolution-ladder.md).
mod resolution {
    use taumap::io::Spectrum;
    use taumap::pipeline::{
        DrtOptions, InvertParams, LambdaChoice, LambdaRule, SpectrumInversion, invert,
    };
    use taumap::synth::{Element, Series, cells, reference_spectrum};

    /// Noise levels (fraction of |Z|, proportional Gaussian).
    const NOISES: [f64; 3] = [0.0, 0.001, 0.01];
    /// Noisy spectra per case and noise level (one noise-free spectrum).
    const SEEDS_PER_CASE: u64 = 5;
    /// A reported peak of at least this fraction of the largest true
    /// process's resistance that matches no true process is spurious; true
    /// processes of at least this fraction must be found.
    const SIGNIFICANT_REL: f64 = 0.05;
    /// True Warburg lines below this fraction of the largest true process
    /// are left out of the matching (too small to tell from ripple).
    const LINE_FLOOR_REL: f64 = 0.01;
    /// Largest distance (decades) between a reported peak and the true
    /// process it is matched to.
    const MATCH_DECADES: f64 = 0.5;
    /// Pair resolution: each of the two peaks within this distance (decades).
    const PAIR_DECADES: f64 = 0.1;
    /// Width (standard deviation, decades) of the Gaussian that smooths the
    /// true and the found distributions before the L2 error of a case with
    /// lines (Voigt, Warburg).
    const SMOOTH_DECADES: f64 = 0.2;

    /// What the ladder tells a method about a case.
    #[derive(Clone, Copy, Debug)]
    pub struct CaseHints {
        /// The cell's low-frequency branch is a capacitor (reflective
        /// Warburg element): a series capacitance belongs in the model.
        // Read by methods given as functions (`Method::from_fn`); the
        // methods of `methods()` decide the series capacitance themselves.
        #[allow(dead_code)]
        pub blocking: bool,
    }

    type InvertFn = dyn Fn(&Spectrum, CaseHints) -> taumap::Result<SpectrumInversion>;

    /// A row of the ladder: a name and a function from a spectrum to its
    /// inversion.
    pub struct Method {
        /// Short name, used on the command line and in the tables.
        pub name: &'static str,
        /// What it runs (in words, for the tables).
        pub description: &'static str,
        invert: Box<InvertFn>,
    }

    impl Method {
        /// A method that is one set of parameters. The series capacitance
        /// follows them (automatic by default, which must find it on the
        /// blocking cases by itself).
        pub fn from_params(
            name: &'static str,
            description: &'static str,
            params: InvertParams,
        ) -> Self {
            Self::from_fn(name, description, move |s, _hints| invert(s, &params))
        }

        /// A method given as a function (free to ignore the hints, for a
        /// method that decides the series capacitance itself).
        pub fn from_fn(
            name: &'static str,
            description: &'static str,
            f: impl Fn(&Spectrum, CaseHints) -> taumap::Result<SpectrumInversion> + 'static,
        ) -> Self {
            Self {
                name,
                description,
                invert: Box::new(f),
            }
        }
    }

    /// The methods of the ladder. To add one, push a row here.
    pub fn methods() -> Vec<Method> {
        let with = |rule: LambdaRule, order: usize| InvertParams {
            drt: DrtOptions {
                lambda: LambdaChoice::Rule(rule),
                penalty_order: order,
                adaptive: None,
                ..DrtOptions::default()
            },
            ..InvertParams::default()
        };
        vec![
            Method::from_params(
                "global",
                "discrepancy rule, ridge penalty (k = 0), global penalty alone (--penalty global; the default before the adaptive penalty)",
                with(LambdaRule::Discrepancy, 0),
            ),
            Method::from_params(
                "gcv",
                "GCV, ridge penalty (k = 0), global",
                with(LambdaRule::Gcv, 0),
            ),
            Method::from_params(
                "order1",
                "discrepancy rule, first-derivative penalty (k = 1), global",
                with(LambdaRule::Discrepancy, 1),
            ),
            Method::from_params(
                "adaptive",
                "uniform penalty refined from the discrepancy rule's solution (--penalty adaptive): the default",
                InvertParams::default(),
            ),
            Method::from_params(
                "adaptive-order2",
                "uniform penalty refined from the discrepancy rule's solution with the second-derivative penalty (k = 2)",
                InvertParams {
                    drt: DrtOptions {
                        penalty_order: 2,
                        ..DrtOptions::default()
                    },
                    ..InvertParams::default()
                },
            ),
        ]
    }

    /// A group of cases reported together.
    #[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
    enum Family {
        Zarc,
        HavriliakNegami,
        ZarcVoigt,
        Multi,
        WarburgTanh,
        WarburgCoth,
        Pair,
    }

    impl Family {
        const ALL: [Family; 7] = [
            Family::Zarc,
            Family::HavriliakNegami,
            Family::ZarcVoigt,
            Family::Multi,
            Family::WarburgTanh,
            Family::WarburgCoth,
            Family::Pair,
        ];

        fn name(self) -> &'static str {
            match self {
                Family::Zarc => "single ZARC",
                Family::HavriliakNegami => "Havriliak-Negami",
                Family::ZarcVoigt => "ZARC + Voigt, 2 decades",
                Family::Multi => "3-4 processes, mohm and Mohm",
                Family::WarburgTanh => "finite Warburg (tanh) + ZARC",
                Family::WarburgCoth => "reflective Warburg (coth)",
                Family::Pair => "ZARC pairs",
            }
        }
    }

    struct Case {
        family: Family,
        cell: Series,
        blocking: bool,
        /// Separation (decades) and R ratio of a ZARC pair.
        pair: Option<(f64, f64)>,
    }

    fn zarc(r_ohm: f64, tau_s: f64, phi: f64) -> Element {
        Element::Zarc { r_ohm, tau_s, phi }
    }

    fn voigt(r_ohm: f64, tau_s: f64) -> Element {
        Element::Voigt { r_ohm, tau_s }
    }

    fn resistor(r_ohm: f64) -> Element {
        Element::Resistor { r_ohm }
    }

    /// The cases, in a fixed order (the seeds follow the order: append new
    /// cases at the end to keep the others' noise).
    fn cases() -> Vec<Case> {
        let plain = |family, cell| Case {
            family,
            cell,
            blocking: false,
            pair: None,
        };
        let mut v = Vec::new();
        for phi in [0.6, 0.7, 0.8, 0.9, 0.95] {
            v.push(plain(Family::Zarc, cells::zarc_with_phi(phi)));
        }
        for beta in [0.5, 0.65, 0.8] {
            v.push(plain(
                Family::HavriliakNegami,
                cells::havriliak_negami(beta),
            ));
        }
        v.push(plain(
            Family::ZarcVoigt,
            Series(vec![
                resistor(5.0),
                voigt(30.0, 1e-5),
                zarc(20.0, 1e-3, 0.7),
            ]),
        ));
        v.push(plain(
            Family::ZarcVoigt,
            Series(vec![
                resistor(5.0),
                zarc(40.0, 1e-5, 0.75),
                voigt(10.0, 1e-3),
            ]),
        ));
        // A lithium-ion cell's milliohms and a coating's megaohms.
        v.push(plain(
            Family::Multi,
            Series(vec![
                resistor(8e-3),
                zarc(3e-3, 1e-5, 0.9),
                zarc(10e-3, 1e-3, 0.8),
                zarc(5e-3, 0.1, 0.7),
            ]),
        ));
        v.push(plain(
            Family::Multi,
            Series(vec![
                resistor(500.0),
                zarc(0.3e6, 3e-6, 0.9),
                zarc(2e6, 3e-4, 0.8),
                voigt(1e6, 0.03),
            ]),
        ));
        v.push(plain(
            Family::Multi,
            Series(vec![
                resistor(5e-3),
                zarc(2e-3, 3e-6, 0.9),
                zarc(4e-3, 1e-4, 0.85),
                zarc(8e-3, 3e-3, 0.8),
                zarc(6e-3, 0.1, 0.75),
            ]),
        ));
        v.push(plain(
            Family::Multi,
            Series(vec![
                resistor(200.0),
                voigt(0.15e6, 1e-6),
                zarc(0.5e6, 1e-4, 0.85),
                zarc(1e6, 1e-2, 0.8),
                Element::HavriliakNegami {
                    r_ohm: 2e6,
                    tau_s: 0.3,
                    alpha: 0.8,
                    beta: 0.7,
                },
            ]),
        ));
        v.push(plain(
            Family::WarburgTanh,
            Series(vec![
                resistor(5.0),
                zarc(10.0, 1e-3, 0.85),
                Element::WarburgFinite {
                    r_ohm: 20.0,
                    tau_s: 1.0,
                },
            ]),
        ));
        v.push(plain(
            Family::WarburgTanh,
            Series(vec![
                resistor(5.0),
                zarc(20.0, 1e-2, 0.8),
                Element::WarburgFinite {
                    r_ohm: 20.0,
                    tau_s: 1.0,
                },
            ]),
        ));
        let blocking = |cell| Case {
            family: Family::WarburgCoth,
            cell,
            blocking: true,
            pair: None,
        };
        v.push(blocking(cells::reflective_warburg()));
        v.push(blocking(Series(vec![
            resistor(1.0),
            Element::WarburgReflective {
                r_ohm: 10.0,
                tau_s: 1.0,
            },
        ])));
        for sep in [0.3, 0.5, 0.7, 1.0] {
            for ratio in [1.0, 2.0] {
                v.push(Case {
                    family: Family::Pair,
                    cell: cells::zarc_pair(sep, ratio),
                    blocking: false,
                    pair: Some((sep, ratio)),
                });
            }
        }
        v
    }

    /// A true process: an element with a continuous DRT (at the maximum of
    /// its distribution), a Voigt element, or one Warburg line.
    #[derive(Clone, Copy, Debug)]
    struct Process {
        tau_s: f64,
        r_ohm: f64,
        /// A Warburg line after the first.
        secondary_line: bool,
    }

    /// Lines taken of each Warburg element for the smoothed L2 (the rest
    /// hold about 2R/(pi^2 n) = 1e-4 R).
    const LINES: usize = 2000;

    /// The maximum of an element's continuous DRT (s), by a scan at 0.001
    /// ln units and a parabola.
    fn mode_tau_s(e: &Element, tau0_s: f64) -> f64 {
        let h = 1e-3;
        let y0 = tau0_s.ln() - 15.0;
        let g = |i: usize| e.gamma_ohm((y0 + h * i as f64).exp()).unwrap_or(0.0);
        let n = 30_000;
        let i = (1..n)
            .max_by(|&a, &b| g(a).total_cmp(&g(b)))
            .expect("non-empty scan");
        let (a, b, c) = (g(i - 1), g(i), g(i + 1));
        let den = a - 2.0 * b + c;
        let shift = if den < 0.0 { 0.5 * (a - c) / den } else { 0.0 };
        (y0 + h * (i as f64 + shift)).exp()
    }

    fn processes(cell: &Series) -> Vec<Process> {
        let mut p = Vec::new();
        for e in &cell.0 {
            match *e {
                Element::Zarc { r_ohm, tau_s, .. }
                | Element::HavriliakNegami { r_ohm, tau_s, .. } => p.push(Process {
                    tau_s: mode_tau_s(e, tau_s),
                    r_ohm,
                    secondary_line: false,
                }),
                _ => {
                    for (k, (tau_s, r_ohm)) in e.lines(200).into_iter().enumerate() {
                        p.push(Process {
                            tau_s,
                            r_ohm,
                            secondary_line: k > 0,
                        });
                    }
                }
            }
        }
        let largest = p.iter().map(|q| q.r_ohm).fold(0.0, f64::max);
        p.retain(|q| q.r_ohm >= LINE_FLOOR_REL * largest);
        p
    }

    /// What one inversion scored.
    struct Outcome {
        case: usize,
        /// Index into NOISES.
        noise: usize,
        /// The inversion returned an error.
        failed: bool,
        spurious: usize,
        /// Element processes (and first Warburg lines) expected / missed.
        expected: usize,
        missed: usize,
        /// Secondary Warburg lines of significant size, and how many found.
        secondary: usize,
        secondary_found: usize,
        /// |log10(tau_found/tau_true)| of each found element process.
        tau_err_dec: Vec<f64>,
        r_pol_err_rel: f64,
        /// Relative L2 error of gamma (smoothed when the case has lines).
        l2: f64,
        l2_smoothed: bool,
        pair_resolved: Option<bool>,
    }

    fn score(case_idx: usize, case: &Case, noise: usize, inv: &SpectrumInversion) -> Outcome {
        let truth = processes(&case.cell);
        let largest = truth.iter().map(|q| q.r_ohm).fold(0.0, f64::max);
        let peaks = &inv.drt.peaks;
        // One-to-one matching, nearest pairs first: first to the significant
        // processes, then the remaining peaks to the smaller lines (so that a
        // small line beside a ZARC cannot take the ZARC's peak).
        let mut peak_of: Vec<Option<usize>> = vec![None; truth.len()];
        let mut taken = vec![false; peaks.len()];
        for significant in [true, false] {
            let mut pairs: Vec<(f64, usize, usize)> = Vec::new();
            for (i, pk) in peaks.iter().enumerate() {
                for (j, q) in truth.iter().enumerate() {
                    let d = (pk.tau_s / q.tau_s).log10().abs();
                    if d <= MATCH_DECADES && (q.r_ohm >= SIGNIFICANT_REL * largest) == significant {
                        pairs.push((d, i, j));
                    }
                }
            }
            pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
            for (_, i, j) in pairs {
                if !taken[i] && peak_of[j].is_none() {
                    taken[i] = true;
                    peak_of[j] = Some(i);
                }
            }
        }
        let spurious = peaks
            .iter()
            .zip(&taken)
            .filter(|(pk, t)| !**t && pk.area >= SIGNIFICANT_REL * largest)
            .count();
        let (mut expected, mut missed, mut secondary, mut secondary_found) = (0, 0, 0, 0);
        let mut tau_err_dec = Vec::new();
        for (q, m) in truth.iter().zip(&peak_of) {
            if q.r_ohm < SIGNIFICANT_REL * largest {
                continue;
            }
            if q.secondary_line {
                secondary += 1;
                secondary_found += usize::from(m.is_some());
            } else {
                expected += 1;
                match m {
                    Some(i) => tau_err_dec.push((peaks[*i].tau_s / q.tau_s).log10().abs()),
                    None => missed += 1,
                }
            }
        }
        let want = case.cell.r_pol_ohm();
        let pair_resolved = case.pair.map(|_| {
            truth.iter().all(|q| {
                peaks
                    .iter()
                    .any(|pk| (pk.tau_s / q.tau_s).log10().abs() <= PAIR_DECADES)
            })
        });
        let (l2, l2_smoothed) = gamma_l2(&case.cell, &inv.drt.tau_s, &inv.drt.gamma);
        Outcome {
            case: case_idx,
            noise,
            failed: false,
            spurious,
            expected,
            missed,
            secondary,
            secondary_found,
            tau_err_dec,
            r_pol_err_rel: (inv.drt.total - want).abs() / want,
            l2,
            l2_smoothed,
            pair_resolved,
        }
    }

    /// Relative L2 error of gamma over the output samples (uniform in
    /// ln tau): ||found - true|| / ||true||. For a cell with lines (Voigt,
    /// Warburg) both are first smoothed by the same Gaussian of
    /// SMOOTH_DECADES (a line becomes that Gaussian times its resistance).
    fn gamma_l2(cell: &Series, tau_s: &[f64], gamma: &[f64]) -> (f64, bool) {
        let y: Vec<f64> = tau_s.iter().map(|t| t.ln()).collect();
        let truth: Vec<f64> = tau_s.iter().map(|&t| cell.gamma_ohm(t)).collect();
        let lines = cell.lines(LINES);
        let ratio = |a: &[f64], b: &[f64]| {
            let num: f64 = a.iter().zip(b).map(|(x, y)| (x - y).powi(2)).sum();
            let den: f64 = b.iter().map(|x| x * x).sum();
            (num / den).sqrt()
        };
        if lines.is_empty() {
            return (ratio(gamma, &truth), false);
        }
        let h = (y[y.len() - 1] - y[0]) / (y.len() - 1) as f64;
        let s = SMOOTH_DECADES * std::f64::consts::LN_10;
        let kernel =
            |d: f64| (-0.5 * (d / s).powi(2)).exp() / (s * (2.0 * std::f64::consts::PI).sqrt());
        let smooth = |g: &[f64]| -> Vec<f64> {
            y.iter()
                .map(|&yj| {
                    g.iter()
                        .zip(&y)
                        .map(|(gi, yi)| gi * h * kernel(yj - yi))
                        .sum()
                })
                .collect()
        };
        let found = smooth(gamma);
        let mut want = smooth(&truth);
        for (w, &yj) in want.iter_mut().zip(&y) {
            *w += lines
                .iter()
                .map(|&(t, r)| r * kernel(yj - t.ln()))
                .sum::<f64>();
        }
        (ratio(&found, &want), true)
    }

    fn seed(case_idx: usize, k: u64) -> u64 {
        1000 + 10 * case_idx as u64 + k
    }

    pub fn run(args: &[String]) {
        let all = methods();
        let chosen: Vec<&Method> = if args.is_empty() {
            all.iter().collect()
        } else {
            all.iter()
                .filter(|m| args.iter().any(|a| a == m.name))
                .collect()
        };
        if chosen.is_empty() {
            let names: Vec<&str> = all.iter().map(|m| m.name).collect();
            eprintln!("no such method; methods: {}", names.join(", "));
            std::process::exit(2);
        }
        let cases = cases();
        let verbose = std::env::var_os("LADDER_VERBOSE").is_some();
        print_cases(&cases);
        let mut results: Vec<(&Method, Vec<Outcome>)> = Vec::new();
        for m in chosen {
            let mut out = Vec::new();
            for (ci, case) in cases.iter().enumerate() {
                for (ni, &noise) in NOISES.iter().enumerate() {
                    let seeds = if noise > 0.0 { SEEDS_PER_CASE } else { 1 };
                    for k in 0..seeds {
                        let s = reference_spectrum(&case.cell, noise, seed(ci, k))
                            .expect("synthetic spectrum is valid");
                        let hints = CaseHints {
                            blocking: case.blocking,
                        };
                        let o = match (m.invert)(&s, hints) {
                            Ok(inv) => {
                                let o = score(ci, case, ni, &inv);
                                if verbose && (o.spurious > 0 || o.missed > 0) {
                                    let got: Vec<String> = inv
                                        .drt
                                        .peaks
                                        .iter()
                                        .map(|p| format!("{:.2}@{:.3}", p.tau_s.log10(), p.area))
                                        .collect();
                                    eprintln!(
                                        "{} case {} noise {noise} seed {}: spurious {} missed {} \
                                         peaks (log10 tau @ area) {got:?}",
                                        m.name,
                                        ci + 1,
                                        seed(ci, k),
                                        o.spurious,
                                        o.missed
                                    );
                                }
                                o
                            }
                            Err(e) => {
                                eprintln!("{} case {}: {e}", m.name, ci + 1);
                                Outcome {
                                    case: ci,
                                    noise: ni,
                                    failed: true,
                                    spurious: 0,
                                    expected: 0,
                                    missed: 0,
                                    secondary: 0,
                                    secondary_found: 0,
                                    tau_err_dec: Vec::new(),
                                    r_pol_err_rel: f64::NAN,
                                    l2: f64::NAN,
                                    l2_smoothed: false,
                                    pair_resolved: None,
                                }
                            }
                        };
                        out.push(o);
                    }
                }
            }
            results.push((m, out));
        }
        print_summary(&results);
        print_families(&cases, &results);
        print_per_case(
            "Relative L2 of gamma (smoothed for cases with lines)",
            &cases,
            &results,
            |o| o.l2,
            3,
        );
        print_per_case(
            "R_pol error (%)",
            &cases,
            &results,
            |o| 100.0 * o.r_pol_err_rel,
            2,
        );
        print_pairs(&cases, &results);
    }

    fn si(v: f64, unit: &str) -> String {
        let a = v.abs();
        let (scale, prefix) = if a >= 1e6 {
            (1e6, "M")
        } else if a >= 1e3 {
            (1e3, "k")
        } else if a >= 1.0 {
            (1.0, "")
        } else if a >= 1e-3 {
            (1e-3, "m")
        } else if a >= 1e-6 {
            (1e-6, "u")
        } else {
            (1e-9, "n")
        };
        format!("{} {prefix}{unit}", trim(v / scale))
    }

    fn trim(x: f64) -> String {
        let s = format!("{x:.3}");
        let s = s.trim_end_matches('0').trim_end_matches('.');
        s.to_string()
    }

    fn describe(e: &Element) -> String {
        match *e {
            Element::Resistor { r_ohm } => si(r_ohm, "ohm"),
            Element::Voigt { r_ohm, tau_s } => {
                format!("Voigt({}, {})", si(r_ohm, "ohm"), si(tau_s, "s"))
            }
            Element::Zarc { r_ohm, tau_s, phi } => {
                format!("ZARC({}, {}, {phi})", si(r_ohm, "ohm"), si(tau_s, "s"))
            }
            Element::HavriliakNegami {
                r_ohm,
                tau_s,
                alpha,
                beta,
            } => format!(
                "HN({}, {}, a {alpha}, b {beta})",
                si(r_ohm, "ohm"),
                si(tau_s, "s")
            ),
            Element::WarburgFinite { r_ohm, tau_s } => {
                format!("W-tanh({}, {})", si(r_ohm, "ohm"), si(tau_s, "s"))
            }
            Element::WarburgReflective { r_ohm, tau_s } => {
                format!("W-coth({}, {})", si(r_ohm, "ohm"), si(tau_s, "s"))
            }
            other => format!("{other:?}"),
        }
    }

    /// Share of R_pol that lies outside the measured band of time constants
    /// 1/(2 pi f) (f from 1e-2 to 1e6 Hz, as in `reference_spectrum`), by
    /// the trapezoid rule at 0.01 ln units over 60 ln units on each side.
    fn beyond_band_rel(cell: &Series) -> f64 {
        let two_pi = 2.0 * std::f64::consts::PI;
        let (lo, hi) = ((1.0 / (two_pi * 1e6)).ln(), (1.0 / (two_pi * 1e-2)).ln());
        let h = 0.01;
        let n = 6000;
        let side = |start: f64, dir: f64| -> f64 {
            (0..=n)
                .map(|i| {
                    let w = if i == 0 || i == n { 0.5 } else { 1.0 };
                    w * h * cell.gamma_ohm((start + dir * h * i as f64).exp())
                })
                .sum()
        };
        let lines: f64 = cell
            .lines(LINES)
            .iter()
            .filter(|(t, _)| t.ln() < lo || t.ln() > hi)
            .map(|l| l.1)
            .sum();
        (side(lo, -1.0) + side(hi, 1.0) + lines) / cell.r_pol_ohm()
    }

    fn print_cases(cases: &[Case]) {
        println!("### Cases\n");
        println!("| # | family | cell | processes to find: tau (R) | R_pol beyond the band (%) |");
        println!("|---|---|---|---|---|");
        for (i, c) in cases.iter().enumerate() {
            let cell: Vec<String> = c.cell.0.iter().map(describe).collect();
            let truth = processes(&c.cell);
            let largest = truth.iter().map(|q| q.r_ohm).fold(0.0, f64::max);
            let want: Vec<String> = truth
                .iter()
                .filter(|q| q.r_ohm >= SIGNIFICANT_REL * largest)
                .map(|q| {
                    format!(
                        "{}{} ({})",
                        if q.secondary_line { "line " } else { "" },
                        si(q.tau_s, "s"),
                        si(q.r_ohm, "ohm")
                    )
                })
                .collect();
            println!(
                "| {} | {} | {}{} | {} | {:.2} |",
                i + 1,
                c.family.name(),
                cell.join(" + "),
                if c.blocking { " (blocking)" } else { "" },
                want.join(", "),
                100.0 * beyond_band_rel(&c.cell)
            );
        }
        println!();
    }

    fn mean(v: &[f64]) -> f64 {
        if v.is_empty() {
            f64::NAN
        } else {
            v.iter().sum::<f64>() / v.len() as f64
        }
    }

    fn max(v: &[f64]) -> f64 {
        v.iter().copied().fold(f64::NAN, f64::max)
    }

    fn pct(noise: f64) -> String {
        format!("{} %", trim(100.0 * noise))
    }

    fn print_summary(results: &[(&Method, Vec<Outcome>)]) {
        println!("### Methods\n");
        println!("| method | what it runs |");
        println!("|---|---|");
        for (m, _) in results {
            println!("| {} | {} |", m.name, m.description);
        }
        println!("\n### Summary per method and noise level\n");
        println!(
            "| method | noise | inversions | with a spurious peak | missed / expected | \
             secondary Warburg lines found | peak tau error mean / max (dec) | \
             R_pol error mean / max (%) | L2 continuous cases mean / max | \
             L2 smoothed, cases with lines mean / max |"
        );
        println!("|---|---|---|---|---|---|---|---|---|---|");
        for (m, out) in results {
            for (ni, &noise) in NOISES.iter().enumerate() {
                let o: Vec<&Outcome> = out.iter().filter(|o| o.noise == ni).collect();
                let ok: Vec<&&Outcome> = o.iter().filter(|o| !o.failed).collect();
                let failed = o.len() - ok.len();
                let with_spurious = ok.iter().filter(|o| o.spurious > 0).count();
                let missed: usize = ok.iter().map(|o| o.missed).sum();
                let expected: usize = ok.iter().map(|o| o.expected).sum();
                let sec: usize = ok.iter().map(|o| o.secondary).sum();
                let sec_found: usize = ok.iter().map(|o| o.secondary_found).sum();
                let tau: Vec<f64> = ok.iter().flat_map(|o| o.tau_err_dec.clone()).collect();
                let rpol: Vec<f64> = ok.iter().map(|o| 100.0 * o.r_pol_err_rel).collect();
                let l2c: Vec<f64> = ok.iter().filter(|o| !o.l2_smoothed).map(|o| o.l2).collect();
                let l2s: Vec<f64> = ok.iter().filter(|o| o.l2_smoothed).map(|o| o.l2).collect();
                println!(
                    "| {} | {} | {}{} | {} ({:.0} %) | {missed} / {expected} | {sec_found} / {sec} | \
                     {:.3} / {:.3} | {:.2} / {:.2} | {:.3} / {:.3} | {:.3} / {:.3} |",
                    m.name,
                    pct(noise),
                    o.len(),
                    if failed > 0 {
                        format!(" ({failed} failed)")
                    } else {
                        String::new()
                    },
                    with_spurious,
                    100.0 * with_spurious as f64 / ok.len().max(1) as f64,
                    mean(&tau),
                    max(&tau),
                    mean(&rpol),
                    max(&rpol),
                    mean(&l2c),
                    max(&l2c),
                    mean(&l2s),
                    max(&l2s),
                );
            }
        }
        println!();
    }

    fn print_families(cases: &[Case], results: &[(&Method, Vec<Outcome>)]) {
        println!("### Per family (all noise levels)\n");
        println!(
            "| family | method | with a spurious peak at 0 / 0.1 / 1 % | missed / expected | \
             max peak tau error (dec) | max R_pol error (%) at <= 0.1 % / 1 % | \
             max L2 at <= 0.1 % / 1 % |"
        );
        println!("|---|---|---|---|---|---|---|");
        for fam in Family::ALL {
            for (m, out) in results {
                let o: Vec<&Outcome> = out
                    .iter()
                    .filter(|o| !o.failed && cases[o.case].family == fam)
                    .collect();
                let spur: Vec<String> = (0..NOISES.len())
                    .map(|n| {
                        let at: Vec<&&Outcome> = o.iter().filter(|o| o.noise == n).collect();
                        format!(
                            "{}/{}",
                            at.iter().filter(|o| o.spurious > 0).count(),
                            at.len()
                        )
                    })
                    .collect();
                let missed: usize = o.iter().map(|o| o.missed).sum();
                let expected: usize = o.iter().map(|o| o.expected).sum();
                let tau: Vec<f64> = o.iter().flat_map(|o| o.tau_err_dec.clone()).collect();
                let split = |f: &dyn Fn(&Outcome) -> f64| {
                    let lo: Vec<f64> = o.iter().filter(|o| o.noise < 2).map(|o| f(o)).collect();
                    let hi: Vec<f64> = o.iter().filter(|o| o.noise == 2).map(|o| f(o)).collect();
                    (max(&lo), max(&hi))
                };
                let rpol = split(&|o| 100.0 * o.r_pol_err_rel);
                let l2 = split(&|o| o.l2);
                let smoothed = o.iter().any(|o| o.l2_smoothed);
                println!(
                    "| {} | {} | {} | {missed} / {expected} | {:.3} | {:.2} / {:.2} | {:.3} / {:.3}{} |",
                    fam.name(),
                    m.name,
                    spur.join(" / "),
                    max(&tau),
                    rpol.0,
                    rpol.1,
                    l2.0,
                    l2.1,
                    if smoothed { " (smoothed)" } else { "" },
                );
            }
        }
        println!();
    }

    /// One row per case, one column per method, the worst seed at each
    /// noise level.
    fn print_per_case(
        title: &str,
        cases: &[Case],
        results: &[(&Method, Vec<Outcome>)],
        metric: impl Fn(&Outcome) -> f64,
        decimals: usize,
    ) {
        println!("### {title} per case (worst seed) at 0 / 0.1 / 1 %\n");
        let names: Vec<&str> = results.iter().map(|(m, _)| m.name).collect();
        println!("| # | family | {} |", names.join(" | "));
        println!("|---|---|{}", "---|".repeat(names.len()));
        for (ci, c) in cases.iter().enumerate() {
            let cols: Vec<String> = results
                .iter()
                .map(|(_, out)| {
                    let per_noise: Vec<String> = (0..NOISES.len())
                        .map(|n| {
                            let v: Vec<f64> = out
                                .iter()
                                .filter(|o| o.case == ci && o.noise == n && !o.failed)
                                .map(&metric)
                                .collect();
                            format!("{:.*}", decimals, max(&v))
                        })
                        .collect();
                    per_noise.join(" / ")
                })
                .collect();
            let smoothed = !c.cell.lines(1).is_empty();
            println!(
                "| {}{} | {} | {} |",
                ci + 1,
                if smoothed { " (lines)" } else { "" },
                c.family.name(),
                cols.join(" | ")
            );
        }
        println!();
    }

    fn print_pairs(cases: &[Case], results: &[(&Method, Vec<Outcome>)]) {
        println!("### Pair resolution (two peaks, each within 0.1 decade)\n");
        println!("| method | separation (dec) | R ratio (fast : slow) | 0 % | 0.1 % | 1 % |");
        println!("|---|---|---|---|---|---|");
        // Pair cases from the widest separation down.
        let mut pairs: Vec<(usize, f64, f64)> = cases
            .iter()
            .enumerate()
            .filter_map(|(i, c)| c.pair.map(|(sep, ratio)| (i, sep, ratio)))
            .collect();
        pairs.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.2.total_cmp(&b.2)));
        let mut smallest = Vec::new();
        for (m, out) in results {
            let resolved = |case: usize, n: usize| -> Vec<bool> {
                out.iter()
                    .filter(|o| o.case == case && o.noise == n)
                    .map(|o| o.pair_resolved == Some(true))
                    .collect()
            };
            for &(ci, sep, ratio) in &pairs {
                let cells: Vec<String> = (0..NOISES.len())
                    .map(|n| {
                        let r = resolved(ci, n);
                        format!("{}/{}", r.iter().filter(|b| **b).count(), r.len())
                    })
                    .collect();
                println!(
                    "| {} | {sep} | {}:1 | {} |",
                    m.name,
                    trim(ratio),
                    cells.join(" | ")
                );
            }
            // Smallest separation resolved in every inversion, with every
            // larger separation resolved too.
            let best: Vec<Option<f64>> = (0..NOISES.len())
                .map(|n| {
                    let mut best = None;
                    for &(_, sep, _) in &pairs {
                        // Every ratio at this separation.
                        let every = pairs
                            .iter()
                            .filter(|p| p.1.total_cmp(&sep).is_eq())
                            .all(|p| resolved(p.0, n).iter().all(|b| *b));
                        if !every {
                            break;
                        }
                        best = Some(sep);
                    }
                    best
                })
                .collect();
            smallest.push((m.name, best));
        }
        println!(
            "\nSmallest separation resolved in every inversion (both ratios, every seed), \
             every larger separation resolved too:\n"
        );
        println!("| method | 0 % | 0.1 % | 1 % |");
        println!("|---|---|---|---|");
        for (name, best) in smallest {
            let cells: Vec<String> = best
                .iter()
                .map(|b| b.map_or("none".to_string(), |s| format!("{s} dec")))
                .collect();
            println!("| {name} | {} |", cells.join(" | "));
        }
    }
}
