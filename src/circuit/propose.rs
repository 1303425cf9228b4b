//! From DRT peaks to equivalent circuits: candidate models of 1..K
//! processes, each fitted by CNLS ([`super::fit`]), ranked by BIC.
//!
//! # Method
//! The series part of every candidate comes from the inversion: a resistor
//! `R_inf`, and an inductor or a capacitor where the inversion kept one;
//! alone, they are the 0-process candidate (so BIC can refuse the first
//! process too).
//! Processes are added one at a time (forward selection): the next one
//! is the DRT peak that the previous candidate's own analytical DRT
//! explains least (the peak's area minus the fitted model's DRT area over
//! the peak's region), so a satellite of a Warburg element, which the
//! Warburg element already explains, is not taken for a new process.
//! The new process starts as a ZARC seeded from the peak: resistance =
//! peak area, tau0 = peak position, phi from the peak's full width at half
//! maximum, inverting the Fuoss-Kirkwood width
//! `FWHM(ln tau) = 2 arcosh(2 + cos(phi pi)) / phi` (from the ZARC DRT of
//! [`Element::gamma_ohm`]). The earlier processes start from their fitted
//! values.
//!
//! After the fit, each process tries the element its shape suggests in
//! place of the ZARC, and keeps it when the BIC is lower, in passes over
//! the processes until no change helps (at most three; each combination of
//! kinds fitted once): a Voigt element
//! (phi near 1: a narrow peak, one parameter fewer), a Havriliak-Negami
//! element (a skewed peak), a Gerischer element (a peak with a long tail
//! towards short tau and a steep edge at long tau), and for the slowest
//! process a transmissive finite Warburg element (a low-frequency 45-degree
//! branch; its DRT lines at tau/a_k, a_k = (k - 1/2)^2 pi^2, put the main
//! peak at 4 tau / pi^2). Choosing between non-nested models by an
//! information criterion is common practice (Burnham & Anderson 2002,
//! section 2.2).
//!
//! When every peak is in and the last candidate was the best so far, the
//! next candidate splits one process in two (two ZARCs half a peak width
//! either side of it, half its resistance each): processes closer than the
//! DRT resolves. Such a candidate needs [`SPLIT_EVIDENCE_BIC`] units of
//! BIC per split to be chosen.
//!
//! The candidate with the lowest BIC is chosen; candidates within
//! [`ProposeOptions::bic_close`] (2) units of it are named as not
//! distinguishable by the data (Burnham & Anderson 2002, section 2.6, use
//! the same 2-unit rule for AIC differences; for BIC: R. E. Kass,
//! A. E. Raftery (1995), J. Am. Stat. Assoc. 90, 773-795, table: "not worth
//! more than a bare mention" below 2).

use super::element::Element;
use super::fit::{CircuitFit, FitData, FitOptions, fit_circuit};
use crate::pipeline::Distribution;
use crate::{Error, Result};
use rayon::prelude::*;
use std::f64::consts::PI;

/// Options of the proposal.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ProposeOptions {
    /// Largest number of processes tried (K).
    pub max_processes: usize,
    /// BIC difference below which two candidates are not distinguishable.
    pub bic_close: f64,
    /// Minimiser options.
    pub fit: FitOptions,
}

impl Default for ProposeOptions {
    /// K = 4, BIC within 2 units, default minimiser.
    fn default() -> Self {
        Self {
            max_processes: 4,
            bic_close: 2.0,
            fit: FitOptions::default(),
        }
    }
}

/// The shape of one DRT peak, as the proposal reads it.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct PeakShape {
    /// Position of the maximum (s).
    pub tau_s: f64,
    /// Area (ohm).
    pub r_ohm: f64,
    /// Full width at half maximum in decades of tau.
    pub fwhm_decades: f64,
    /// (right half-width - left half-width) / FWHM, in ln tau: negative for
    /// a tail towards short tau.
    pub skew: f64,
    /// Region of the peak (between its separating minima), s.
    pub tau_lo_s: f64,
    /// Upper end of the region, s.
    pub tau_hi_s: f64,
}

/// An element kind tried for a candidate and the BIC it reached.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Variant {
    /// The element kinds of the model, in series order (keywords).
    pub kinds: Vec<&'static str>,
    /// Its BIC (`None` when its fit failed).
    pub bic: Option<f64>,
}

/// One candidate: the best model found with a given number of processes.
#[derive(Clone, Debug)]
pub struct Candidate {
    /// Number of relaxing elements.
    pub processes: usize,
    /// The fit of the kept variant.
    pub fit: CircuitFit,
    /// The DRT peak each element was seeded from (`None` for the series
    /// terms), parallel to `fit.elements`.
    pub peak_of: Vec<Option<usize>>,
    /// Every variant tried, the kept one included.
    pub variants: Vec<Variant>,
    /// How many of its processes were added by splitting a process in two
    /// rather than from a DRT peak: each split needs strong evidence
    /// ([`SPLIT_EVIDENCE_BIC`]) for the candidate to be chosen.
    pub splits: usize,
}

/// How much lower (in BIC units) a candidate must be, per process added by
/// splitting, than the candidates with fewer splits to be chosen: the
/// peaks are evidence of their own for the candidates built from them,
/// and a split has none. 6 is where Kass & Raftery (1995) put "strong"
/// evidence. Measured on the ladder (docs/model.md): without it, a broad
/// ZARC came back as two Voigt elements 2 to 5 BIC units better at 0.5
/// and 1 % noise.
pub const SPLIT_EVIDENCE_BIC: f64 = 6.0;

/// The ranked candidates.
#[derive(Clone, Debug)]
pub struct Selection {
    /// Candidates in order of their process count.
    pub candidates: Vec<Candidate>,
    /// Index of the chosen candidate (lowest BIC).
    pub chosen: usize,
    /// Indices of the other candidates within `bic_close` of the chosen one.
    pub close: Vec<usize>,
    /// The DRT peaks read, in ascending tau.
    pub peaks: Vec<PeakShape>,
    /// Plain-language warnings about the proposal.
    pub warnings: Vec<String>,
}

impl Selection {
    /// The chosen candidate.
    pub fn chosen(&self) -> &Candidate {
        &self.candidates[self.chosen]
    }
}

/// Reads the shape of each peak of `drt` from its gamma on the grid.
pub fn peak_shapes(drt: &Distribution) -> Vec<PeakShape> {
    let ln: Vec<f64> = drt.tau_s.iter().map(|t| t.ln()).collect();
    let g = &drt.gamma;
    drt.peaks
        .iter()
        .map(|p| {
            let (lo, hi) = (p.tau_lo_s.ln(), p.tau_hi_s.ln());
            let in_region = |i: usize| ln[i] >= lo - 1e-9 && ln[i] <= hi + 1e-9;
            // The grid point of the maximum inside the region.
            let imax = (0..g.len())
                .filter(|&i| in_region(i))
                .max_by(|&a, &b| g[a].total_cmp(&g[b]))
                .unwrap_or(0);
            let half = 0.5 * g[imax];
            let x0 = p.tau_s.ln();
            // Walk out to the half maximum (or the region's edge).
            let cross = |step: isize| -> f64 {
                let mut i = imax as isize;
                loop {
                    let j = i + step;
                    if j < 0 || j as usize >= g.len() || !in_region(j as usize) {
                        return ln[i as usize];
                    }
                    let (gi, gj) = (g[i as usize], g[j as usize]);
                    if gj <= half {
                        let t = if gi > gj {
                            (gi - half) / (gi - gj)
                        } else {
                            0.0
                        };
                        return ln[i as usize] + t * (ln[j as usize] - ln[i as usize]);
                    }
                    i = j;
                }
            };
            let left = (x0 - cross(-1)).max(0.0);
            let right = (cross(1) - x0).max(0.0);
            let fwhm = left + right;
            PeakShape {
                tau_s: p.tau_s,
                r_ohm: p.area,
                fwhm_decades: fwhm / std::f64::consts::LN_10,
                skew: if fwhm > 0.0 {
                    (right - left) / fwhm
                } else {
                    0.0
                },
                tau_lo_s: p.tau_lo_s,
                tau_hi_s: p.tau_hi_s,
            }
        })
        .collect()
}

/// FWHM in ln tau of the Fuoss-Kirkwood distribution of a ZARC with
/// exponent `phi`: `2 arcosh(2 + cos(phi pi)) / phi`.
pub fn zarc_fwhm_ln(phi: f64) -> f64 {
    2.0 * (2.0 + (phi * PI).cos()).acosh() / phi
}

/// The ZARC exponent whose DRT has the full width at half maximum
/// `fwhm_ln` (in ln tau), by bisection on [0.3, 0.97]: a width below that
/// of phi = 0.97 gives 0.97 (the inversion's resolution broadens narrow
/// peaks, so the seed errs towards a narrow arc).
pub fn phi_from_fwhm(fwhm_ln: f64) -> f64 {
    let (mut a, mut b) = (0.3f64, 0.97f64);
    if fwhm_ln <= zarc_fwhm_ln(b) {
        return b;
    }
    if fwhm_ln >= zarc_fwhm_ln(a) {
        return a;
    }
    // The width falls as phi grows.
    for _ in 0..60 {
        let m = 0.5 * (a + b);
        if zarc_fwhm_ln(m) > fwhm_ln {
            a = m;
        } else {
            b = m;
        }
    }
    0.5 * (a + b)
}

/// Area of the continuous part of the DRT of `elements` between
/// `tau_lo_s` and `tau_hi_s` (ohm), by the midpoint rule at 200 points per
/// decade (at least one point): divided by the width in ln tau, the mean
/// gamma over a cell, finite even where gamma is not (the Gerischer
/// element at tau0).
pub fn continuous_area(elements: &[Element], tau_lo_s: f64, tau_hi_s: f64) -> f64 {
    let (a, b) = (tau_lo_s.ln(), tau_hi_s.ln());
    let n = (((b - a) / std::f64::consts::LN_10) * 200.0)
        .ceil()
        .max(1.0) as usize;
    let h = (b - a) / n as f64;
    elements
        .iter()
        .filter(|e| e.gamma_ohm(1.0).is_some())
        .map(|e| {
            (0..n)
                .map(|i| e.gamma_ohm((a + h * (i as f64 + 0.5)).exp()).unwrap_or(0.0) * h)
                .sum::<f64>()
        })
        .sum()
}

/// Area of the DRT of `elements` between `tau_lo_s` and `tau_hi_s` (ohm):
/// the continuous parts ([`continuous_area`]) and the lines (Voigt,
/// Warburg: 40 terms) that fall inside.
fn model_area(elements: &[Element], tau_lo_s: f64, tau_hi_s: f64) -> f64 {
    continuous_area(elements, tau_lo_s, tau_hi_s)
        + elements
            .iter()
            .flat_map(|e| e.lines(40))
            .filter(|(t, _)| *t >= tau_lo_s && *t <= tau_hi_s)
            .map(|(_, r)| r)
            .sum::<f64>()
}

/// The characteristic time of a process element (s), for ordering.
fn tau_of(e: &Element) -> f64 {
    match *e {
        Element::Voigt { tau_s, .. }
        | Element::Zarc { tau_s, .. }
        | Element::HavriliakNegami { tau_s, .. }
        | Element::WarburgFinite { tau_s, .. }
        | Element::WarburgReflective { tau_s, .. }
        | Element::Gerischer { tau_s, .. } => tau_s,
        _ => f64::NAN,
    }
}

/// A ZARC seeded from a peak.
fn zarc_seed(p: &PeakShape) -> Element {
    Element::Zarc {
        r_ohm: p.r_ohm.max(f64::MIN_POSITIVE),
        tau_s: p.tau_s,
        phi: phi_from_fwhm(p.fwhm_decades * std::f64::consts::LN_10),
    }
}

/// The alternatives to try in place of a fitted process element `e`,
/// seeded from its fitted values; `slowest`: it is the slowest process.
fn alternatives(e: &Element, shape: Option<&PeakShape>, slowest: bool) -> Vec<Element> {
    let Element::Zarc { r_ohm, tau_s, phi } = *e else {
        return Vec::new();
    };
    let skew = shape.map_or(0.0, |s| s.skew);
    let mut alt = Vec::new();
    if phi > 0.8 {
        alt.push(Element::Voigt { r_ohm, tau_s });
    }
    if slowest {
        // Main line of the transmissive Warburg at 4 tau / pi^2 with 8/pi^2
        // of R.
        alt.push(Element::WarburgFinite {
            r_ohm,
            tau_s: tau_s * PI * PI / 4.0,
        });
    }
    if skew.abs() > 0.1 {
        alt.push(Element::HavriliakNegami {
            r_ohm,
            tau_s,
            alpha: phi.min(0.98),
            beta: if skew < 0.0 { 0.7 } else { 0.95 },
        });
    }
    if skew < -0.1 {
        alt.push(Element::Gerischer {
            r_ohm,
            tau_s: tau_s * 2.0,
        });
    }
    alt
}

/// The processes with process `i` split into two ZARCs half a peak width
/// either side of its time constant, each with half its resistance (for
/// processes closer than the DRT resolves); `None` for elements that are
/// not split (Warburg and Gerischer elements: one process by nature).
fn split(procs: &[(Element, Option<usize>)], i: usize) -> Option<Vec<(Element, Option<usize>)>> {
    let (e, tag) = procs[i];
    let (r_ohm, tau_s, phi) = match e {
        Element::Zarc { r_ohm, tau_s, phi } => (r_ohm, tau_s, phi),
        Element::Voigt { r_ohm, tau_s } => (r_ohm, tau_s, 1.0),
        Element::HavriliakNegami {
            r_ohm,
            tau_s,
            alpha,
            ..
        } => (r_ohm, tau_s, alpha),
        _ => return None,
    };
    let phi = phi.min(0.97);
    let half = 0.5 * zarc_fwhm_ln(phi).max(1.0);
    let part = |t: f64| Element::Zarc {
        r_ohm: 0.5 * r_ohm,
        tau_s: t,
        phi: (phi + 0.1).min(0.97),
    };
    let mut out: Vec<(Element, Option<usize>)> = procs.to_vec();
    out[i] = (part(tau_s * (-half).exp()), tag);
    out.push((part(tau_s * half.exp()), tag));
    out.sort_by(|a, b| tau_of(&a.0).total_cmp(&tau_of(&b.0)));
    Some(out)
}

/// Fits `start` and returns the fit with its processes in ascending tau:
/// a fit may trade the roles of two elements of one kind (the same
/// circuit), and the candidates are read and compared process by process,
/// so a permuted result is put in order and refitted from there (one or
/// two iterations).
fn fit_ordered(data: &FitData, start: &[Element], opts: &FitOptions) -> Result<CircuitFit> {
    let fit = fit_circuit(data, start, &[], opts)?;
    let circuit = fit.circuit();
    let procs: Vec<usize> = (0..circuit.len())
        .filter(|&i| circuit[i].kind().is_process())
        .collect();
    let ordered = procs
        .windows(2)
        .all(|w| tau_of(&circuit[w[0]]) <= tau_of(&circuit[w[1]]));
    if ordered {
        return Ok(fit);
    }
    let mut sorted: Vec<Element> = procs.iter().map(|&i| circuit[i]).collect();
    sorted.sort_by(|a, b| tau_of(a).total_cmp(&tau_of(b)));
    let mut again = circuit.clone();
    for (&slot, e) in procs.iter().zip(sorted) {
        again[slot] = e;
    }
    // The ordered refit starts at the same minimum; should it fail, the
    // first fit stands.
    Ok(fit_circuit(data, &again, &[], opts).unwrap_or(fit))
}

/// Gives the processes (in ascending tau) the peak tags in ascending tau
/// of their peaks, so that the i-th process is read with the i-th peak
/// after a fit that traded roles (untagged processes keep their places).
fn retag(procs: &mut [(Element, Option<usize>)], peaks: &[PeakShape]) {
    let mut tags: Vec<usize> = procs.iter().filter_map(|p| p.1).collect();
    tags.sort_by(|&a, &b| peaks[a].tau_s.total_cmp(&peaks[b].tau_s));
    let mut it = tags.into_iter();
    for p in procs.iter_mut().filter(|p| p.1.is_some()) {
        p.1 = it.next();
    }
}

/// Builds and fits the candidates for the spectrum `data` from its DRT
/// `drt` (the inversion of the same spectrum).
pub fn propose(data: &FitData, drt: &Distribution, opts: &ProposeOptions) -> Result<Selection> {
    if opts.max_processes == 0 {
        return Err(Error::Param {
            name: "max-processes",
            expected: "at least 1",
            value: 0.0,
        });
    }
    let peaks = peak_shapes(drt);
    let mut warnings = Vec::new();
    // Series terms from the inversion.
    let r_inf = drt
        .series
        .instantaneous
        .filter(|r| *r > 0.0)
        .unwrap_or_else(|| 1e-3 * peaks.iter().map(|p| p.r_ohm).sum::<f64>());
    let mut base = vec![Element::Resistor { r_ohm: r_inf }];
    if let Some(l) = drt.series.inductance_h.filter(|l| *l > 0.0) {
        base.push(Element::Inductor { l_h: l });
    }
    let capacitor = drt
        .series
        .series_capacitance_f
        .filter(|c| *c > 0.0 && c.is_finite())
        .map(|c| Element::Capacitor { c_f: c });

    let mut candidates: Vec<Candidate> = Vec::new();
    let mut used = vec![false; peaks.len()];
    // Process elements of the current model and the peak of each.
    let mut procs: Vec<(Element, Option<usize>)> = Vec::new();
    let assemble = |procs: &[(Element, Option<usize>)]| -> (Vec<Element>, Vec<Option<usize>>) {
        let mut e = base.clone();
        let mut tags = vec![None; base.len()];
        for (p, t) in procs {
            e.push(*p);
            tags.push(*t);
        }
        if let Some(c) = capacitor {
            e.push(c);
            tags.push(None);
        }
        (e, tags)
    };
    // The series terms alone: the candidate of no process, so that BIC can
    // refuse the first one too (a spectrum of a resistor and noise).
    {
        let (zero, tags) = assemble(&[]);
        match fit_circuit(data, &zero, &[], &opts.fit) {
            Ok(fit) => candidates.push(Candidate {
                processes: 0,
                variants: vec![Variant {
                    kinds: zero.iter().map(|e| e.kind().name()).collect(),
                    bic: Some(fit.bic),
                }],
                fit,
                peak_of: tags,
                splits: 0,
            }),
            Err(e) => warnings.push(format!("0 processes: fit failed: {e}")),
        }
    }
    for _k in 1..=opts.max_processes {
        // The peak the current model explains least (its area minus the
        // model's DRT area over its region, computed once per peak).
        let current: Vec<Element> = procs.iter().map(|(e, _)| *e).collect();
        let next = (0..peaks.len())
            .filter(|&i| !used[i])
            .map(|i| {
                let p = &peaks[i];
                (i, p.r_ohm - model_area(&current, p.tau_lo_s, p.tau_hi_s))
            })
            .max_by(|a, b| a.1.total_cmp(&b.1))
            .map(|(i, _)| i);
        let starts: Vec<Vec<(Element, Option<usize>)>> = if let Some(next) = next {
            used[next] = true;
            procs.push((zarc_seed(&peaks[next]), Some(next)));
            procs.sort_by(|a, b| tau_of(&a.0).total_cmp(&tau_of(&b.0)));
            // Two starts: the earlier processes at their fitted values, and
            // every process fresh from its peak (the fitted values of a model
            // that lacked a process are bent to make up for it).
            let fresh: Vec<(Element, Option<usize>)> = procs
                .iter()
                .map(|(e, t)| (t.map_or(*e, |p| zarc_seed(&peaks[p])), *t))
                .collect();
            vec![procs.clone(), fresh]
        } else {
            // Every peak is in: one more process only by splitting one in
            // two (processes closer than the DRT resolves), and only while
            // the last candidate was the best so far.
            let last_is_best = candidates
                .last()
                .is_some_and(|l: &Candidate| candidates.iter().all(|c| c.fit.bic >= l.fit.bic));
            if !last_is_best {
                break;
            }
            (0..procs.len()).filter_map(|i| split(&procs, i)).collect()
        };
        if starts.is_empty() {
            break;
        }
        let mut variants = Vec::new();
        let mut best: Option<(CircuitFit, Vec<Element>, usize)> = None;
        let mut failure = None;
        // The starts are fitted in parallel and compared in their order:
        // the same choice for any number of threads.
        let fits: Vec<(Vec<Element>, Result<CircuitFit>)> = starts
            .par_iter()
            .map(|st| {
                let (elements, _) = assemble(st);
                let fit = fit_ordered(data, &elements, &opts.fit);
                (elements, fit)
            })
            .collect();
        for (si, (elements, fit)) in fits.into_iter().enumerate() {
            match fit {
                Ok(f) => {
                    if best.as_ref().is_none_or(|(b, _, _)| f.bic < b.bic) {
                        best = Some((f, elements, si));
                    }
                }
                Err(e) => failure = Some(e),
            }
        }
        let Some((mut best, start, si)) = best else {
            warnings.push(format!(
                "{} processes: fit failed: {}",
                starts[0].len(),
                failure.map_or_else(String::new, |e| e.to_string())
            ));
            break;
        };
        procs.clone_from(&starts[si]);
        retag(&mut procs, &peaks);
        let (_, tags) = assemble(&procs);
        variants.push(Variant {
            kinds: start.iter().map(|e| e.kind().name()).collect(),
            bic: Some(best.bic),
        });
        // Element-kind variants, one process at a time, in passes until
        // none improves the BIC (a kind that lost while a neighbour was
        // still wrong gets another chance); each combination of kinds is
        // fitted once.
        let offset = base.len();
        let mut tried = std::collections::BTreeSet::new();
        tried.insert(start.iter().map(Element::kind).collect::<Vec<_>>());
        for _pass in 0..3 {
            let mut improved = false;
            for i in 0..procs.len() {
                let fitted: Vec<Element> = best.circuit();
                let shape = procs[i].1.map(|p| &peaks[p]);
                let trials: Vec<Vec<Element>> =
                    alternatives(&fitted[offset + i], shape, i + 1 == procs.len())
                        .into_iter()
                        .map(|alt| {
                            let mut trial = fitted.clone();
                            trial[offset + i] = alt;
                            trial
                        })
                        .filter(|t| tried.insert(t.iter().map(Element::kind).collect::<Vec<_>>()))
                        .collect();
                // In parallel, then taken in order (thread-count independent).
                let results: Vec<Result<CircuitFit>> = trials
                    .par_iter()
                    .map(|t| fit_ordered(data, t, &opts.fit))
                    .collect();
                for (trial, r) in trials.iter().zip(results) {
                    variants.push(Variant {
                        kinds: trial.iter().map(|e| e.kind().name()).collect(),
                        bic: r.as_ref().ok().map(|f| f.bic),
                    });
                    if let Ok(f) = r
                        && f.converged
                        && f.bic < best.bic
                    {
                        best = f;
                        improved = true;
                    }
                }
            }
            if !improved {
                break;
            }
        }
        // Carry the fitted processes forward (in tau order).
        let fitted = best.circuit();
        for (i, p) in procs.iter_mut().enumerate() {
            p.0 = fitted[offset + i];
        }
        candidates.push(Candidate {
            processes: best.processes(),
            fit: best,
            peak_of: tags,
            variants,
            splits: candidates.last().map_or(0, |c: &Candidate| c.splits)
                + usize::from(next.is_none()),
        });
        // Keep the order of the candidates' elements by tau for the next
        // step (a Warburg's tau is not its peak's).
        procs.sort_by(|a, b| tau_of(&a.0).total_cmp(&tau_of(&b.0)));
    }
    if candidates.is_empty() {
        return Err(Error::Data(format!(
            "no candidate circuit could be fitted: {}",
            warnings.join("; ")
        )));
    }
    let score = |c: &Candidate| c.fit.bic + SPLIT_EVIDENCE_BIC * c.splits as f64;
    let chosen = (0..candidates.len())
        .min_by(|&a, &b| score(&candidates[a]).total_cmp(&score(&candidates[b])))
        .unwrap_or(0);
    let best_bic = candidates[chosen].fit.bic;
    let best_score = score(&candidates[chosen]);
    let close: Vec<usize> = (0..candidates.len())
        .filter(|&i| i != chosen && score(&candidates[i]) - best_score < opts.bic_close)
        .collect();
    if chosen + 1 == candidates.len() && used.iter().any(|u| !u) {
        warnings.push(format!(
            "the largest candidate ({} processes) is the best and the DRT has {} peaks: more processes may be present (raise the maximum)",
            candidates[chosen].processes,
            peaks.len()
        ));
    }
    for c in candidates
        .iter()
        .filter(|c| c.splits > 0 && c.fit.bic < best_bic)
    {
        warnings.push(format!(
            "the {}-process candidate (with a process split in two that the DRT shows as one peak) has a BIC {:.1} units lower than the chosen one, short of the {SPLIT_EVIDENCE_BIC} units a split needs: the data hint at a process the DRT does not resolve",
            c.processes,
            best_bic - c.fit.bic
        ));
    }
    for c in candidates.iter().filter(|c| !c.fit.converged) {
        warnings.push(format!(
            "the {}-process candidate did not converge ({})",
            c.processes, c.fit.termination
        ));
    }
    Ok(Selection {
        candidates,
        chosen,
        close,
        peaks,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fwhm_of_a_zarc_inverts() {
        // phi = 1/2: gamma ~ 1/cosh(x/2) (Fuoss-Kirkwood with cos(pi/2) = 0),
        // half maximum at cosh(x/2) = 2, FWHM = 4 arcosh(2) = 5.268; phi -> 1
        // narrows to the Voigt element's line.
        assert!((zarc_fwhm_ln(0.5) - 4.0 * 2f64.acosh()).abs() < 1e-12);
        assert!(zarc_fwhm_ln(0.9999) < 0.1);
        for phi in [0.4, 0.6, 0.85, 0.95] {
            assert!((phi_from_fwhm(zarc_fwhm_ln(phi)) - phi).abs() < 1e-9);
        }
        assert_eq!(phi_from_fwhm(0.1), 0.97);
    }

    #[test]
    fn model_area_counts_lines_and_continuous_parts() {
        let z = Element::Zarc {
            r_ohm: 2.0,
            tau_s: 1e-3,
            phi: 0.8,
        };
        // Whole ZARC within +-20 decades.
        assert!((model_area(&[z], 1e-23, 1e17) - 2.0).abs() < 1e-3);
        // Half of it below tau0 (symmetric distribution).
        assert!((model_area(&[z], 1e-23, 1e-3) - 1.0).abs() < 1e-3);
        let w = Element::WarburgFinite {
            r_ohm: 1.0,
            tau_s: 1.0,
        };
        // Only the first line, 8/pi^2 of R, between 0.2 and 1 s.
        assert!((model_area(&[w], 0.2, 1.0) - 8.0 / PI / PI).abs() < 1e-12);
    }
}
