//! Equivalent circuits from DRT peaks (`taumap::circuit`): the process
//! count chosen by BIC, the accuracy of the CNLS fit, and the honesty of
//! its standard errors, on spectra simulated from analytical elements.

use taumap::circuit::fit::{FitData, FitOptions, fit_circuit};
use taumap::circuit::propose::{ProposeOptions, Selection, propose};
use taumap::io::Spectrum;
use taumap::pipeline::{InvertParams, invert};
use taumap::synth::{Element, Series, add_noise, cells, log_frequencies};

/// 81 frequencies, 10 mHz to 1 MHz, 10 per decade.
fn frequencies() -> Vec<f64> {
    log_frequencies(1e-2, 1e6, 10.0)
}

fn noisy(cell: &Series, noise_rel: f64, seed: u64) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let f = frequencies();
    let (mut re, mut im) = cell.sample(&f);
    add_noise(&mut re, &mut im, noise_rel, seed);
    (f, re, im)
}

fn select(f: &[f64], re: &[f64], im: &[f64]) -> Selection {
    let spectrum = Spectrum::new(f.to_vec(), re.to_vec(), im.to_vec()).unwrap();
    let inv = invert(&spectrum, &InvertParams::default()).unwrap();
    let data = FitData::new(f, re, im).unwrap();
    propose(&data, &inv.drt, &ProposeOptions::default()).unwrap()
}

/// The ladder's circuit (`cells::model_ladder`, shared with
/// examples/model_ladder.rs).
fn ladder_cell(processes: usize, seed: u64) -> Series {
    cells::model_ladder(processes, seed)
}

/// 1 to 4 processes, 5 circuits each (20 spectra, fixed seeds), 0.5 %
/// noise: the count chosen by BIC is the true one every time, the kinds of
/// the ladder are all present (Voigt, ZARC, Warburg), and the chosen
/// element kinds are the true ones in at least 15 of the 20 (a ZARC with
/// phi near 1 and a Voigt element are sometimes not told apart).
#[test]
fn ladder_of_one_to_four_processes_gets_every_count_right() {
    let mut kinds = std::collections::BTreeSet::new();
    let mut wrong = Vec::new();
    let mut kinds_right = 0;
    for processes in 1..=4 {
        for seed in 0..5 {
            let cell = ladder_cell(processes, seed);
            kinds.extend(cell.0.iter().map(|e| e.kind()));
            let (f, re, im) = noisy(&cell, 0.005, seed + 7);
            let sel = select(&f, &re, &im);
            let chosen: Vec<_> = sel
                .chosen()
                .fit
                .circuit()
                .iter()
                .map(|e| e.kind())
                .collect();
            let truth: Vec<_> = cell.0.iter().map(|e| e.kind()).collect();
            kinds_right += usize::from(chosen == truth);
            if sel.chosen().processes != processes {
                let bics: Vec<String> = sel
                    .candidates
                    .iter()
                    .map(|c| format!("{}: {:.1} {:?}", c.processes, c.fit.bic, c.fit.circuit()))
                    .collect();
                wrong.push((
                    processes,
                    seed,
                    sel.chosen().processes,
                    sel.peaks.len(),
                    bics,
                ));
            }
        }
    }
    assert!(
        wrong.is_empty(),
        "(truth, seed, chosen, peaks, candidates): {wrong:#?}"
    );
    assert_eq!(kinds.len(), 4, "{kinds:?}");
    eprintln!("element kinds right in {kinds_right} of 20");
    assert!(
        kinds_right >= 15,
        "element kinds right in {kinds_right} of 20"
    );
}

/// A single ZARC at 0.1 % noise: R, tau0 and phi within 2 % of the truth.
#[test]
fn single_zarc_parameters_within_two_percent() {
    for (phi, seed) in [(0.65, 1), (0.8, 2), (0.92, 3)] {
        let cell = Series(vec![
            Element::Resistor { r_ohm: 0.05 },
            Element::Zarc {
                r_ohm: 0.2,
                tau_s: 3e-3,
                phi,
            },
        ]);
        let (f, re, im) = noisy(&cell, 0.001, seed);
        let sel = select(&f, &re, &im);
        let c = sel.chosen();
        assert_eq!(c.processes, 1);
        let z = c
            .fit
            .elements
            .iter()
            .find(|e| matches!(e.element, Element::Zarc { .. }))
            .unwrap_or_else(|| panic!("no ZARC chosen for phi {phi}: {:?}", c.fit.circuit()));
        let p = z.element.params();
        for (got, want) in p.iter().zip([0.2, 3e-3, phi]) {
            assert!((got / want - 1.0).abs() < 0.02, "phi {phi}: {p:?}");
        }
    }
}

/// Over 60 noisy realisations of a three-process circuit (8 free
/// parameters), the truth lies within two standard errors for 90-98 % of
/// the parameter estimates (95.4 % expected for honest errors of a
/// Gaussian estimate).
#[test]
fn standard_errors_are_honest() {
    let truth = vec![
        Element::Resistor { r_ohm: 0.02 },
        Element::Zarc {
            r_ohm: 0.015,
            tau_s: 2e-5,
            phi: 0.8,
        },
        Element::Voigt {
            r_ohm: 0.01,
            tau_s: 2e-3,
        },
        Element::WarburgFinite {
            r_ohm: 0.02,
            tau_s: 1.0,
        },
    ];
    let cell = Series(truth.clone());
    let start: Vec<Element> = truth
        .iter()
        .map(|e| {
            let p: Vec<f64> = e
                .params()
                .iter()
                .map(|v| if *v < 1.0 { v * 0.9 } else { v * 1.1 })
                .collect();
            e.kind().element(&p)
        })
        .collect();
    let (mut inside, mut total) = (0usize, 0usize);
    for seed in 0..60 {
        let (f, re, im) = noisy(&cell, 0.005, 100 + seed);
        let data = FitData::new(&f, &re, &im).unwrap();
        let fit = fit_circuit(&data, &start, &[], &FitOptions::default()).unwrap();
        assert!(fit.converged, "seed {seed}: {}", fit.termination);
        for (e, t) in fit.elements.iter().zip(&truth) {
            for (p, tv) in e.params.iter().zip(t.params()) {
                let se = p.se.expect("every parameter determined");
                total += 1;
                inside += usize::from((p.value - tv).abs() <= 2.0 * se);
            }
        }
    }
    let share = inside as f64 / total as f64;
    eprintln!("standard errors: {inside}/{total} within 2 SE");
    assert!(
        (0.90..=0.98).contains(&share),
        "{inside}/{total} = {share:.3}"
    );
}

/// The chosen count and kinds do not depend on the scale of the
/// impedance (a cell of 1 cm2 or of 100 cm2).
#[test]
fn choice_is_scale_free() {
    let cell = ladder_cell(3, 2);
    let (f, re, im) = noisy(&cell, 0.005, 5);
    let a = select(&f, &re, &im);
    let k = 1e3;
    let re2: Vec<f64> = re.iter().map(|v| v * k).collect();
    let im2: Vec<f64> = im.iter().map(|v| v * k).collect();
    let b = select(&f, &re2, &im2);
    let kinds = |s: &Selection| {
        s.chosen()
            .fit
            .circuit()
            .iter()
            .map(|e| e.kind())
            .collect::<Vec<_>>()
    };
    assert_eq!(kinds(&a), kinds(&b));
    let (ra, rb) = (
        a.chosen().fit.elements[1].params[0].value,
        b.chosen().fit.elements[1].params[0].value,
    );
    assert!((rb / (k * ra) - 1.0).abs() < 1e-4, "{ra} {rb}");
}

/// An under-regularised DRT (lambda fixed at 1e-7) splits processes into
/// ripple peaks: the proposal then offers more processes than there are,
/// and BIC must refuse the extra ones.
#[test]
fn ripple_peaks_of_a_weak_penalty_are_refused() {
    use taumap::pipeline::LambdaChoice;
    let mut offered_more = 0;
    for (processes, seed) in [(2, 1), (3, 0), (3, 3), (2, 4)] {
        let cell = ladder_cell(processes, seed);
        let (f, re, im) = noisy(&cell, 0.005, seed + 7);
        let spectrum = Spectrum::new(f.clone(), re.clone(), im.clone()).unwrap();
        let mut params = InvertParams::default();
        params.drt.lambda = LambdaChoice::Fixed(1e-7);
        params.drt.adaptive = None;
        let inv = invert(&spectrum, &params).unwrap();
        let data = FitData::new(&f, &re, &im).unwrap();
        let sel = propose(
            &data,
            &inv.drt,
            &ProposeOptions {
                max_processes: 6,
                ..ProposeOptions::default()
            },
        )
        .unwrap();
        offered_more += usize::from(sel.candidates.len() > processes);
        let bics: Vec<String> = sel
            .candidates
            .iter()
            .map(|c| format!("{}: {:.1}", c.processes, c.fit.bic))
            .collect();
        assert_eq!(
            sel.chosen().processes,
            processes,
            "seed {seed}, {} peaks: {bics:?}",
            sel.peaks.len()
        );
    }
    assert!(
        offered_more >= 2,
        "the weak penalty split too few peaks: {offered_more}"
    );
}

/// At 2 % noise the DRT merges neighbouring processes into one peak; a
/// candidate that splits a process in two (on strong BIC evidence) gets
/// the count right where the peaks alone fall short.
#[test]
fn unresolved_processes_are_found_by_splitting() {
    for (processes, seed) in [(2, 4), (3, 2), (3, 9), (4, 8)] {
        let cell = ladder_cell(processes, seed);
        let (f, re, im) = noisy(&cell, 0.02, seed + 7);
        let sel = select(&f, &re, &im);
        let bics: Vec<String> = sel
            .candidates
            .iter()
            .map(|c| format!("{} ({} splits): {:.1}", c.processes, c.splits, c.fit.bic))
            .collect();
        assert!(
            sel.peaks.len() < processes,
            "seed {seed}: the DRT resolved every process: {bics:?}"
        );
        assert_eq!(sel.chosen().processes, processes, "seed {seed}: {bics:?}");
        assert!(sel.chosen().splits >= 1);
    }
}

/// A spectrum of a resistor and noise: the 0-process candidate (the
/// series terms alone) wins; BIC refuses the first process too.
#[test]
fn resistor_and_noise_have_no_process() {
    let cell = Series(vec![Element::Resistor { r_ohm: 10.0 }]);
    for seed in 1..=3 {
        let (f, re, im) = noisy(&cell, 0.005, seed);
        let spectrum = Spectrum::new(f.clone(), re.clone(), im.clone()).unwrap();
        let inv = invert(&spectrum, &InvertParams::default()).unwrap();
        let data = FitData::new(&f, &re, &im).unwrap();
        let sel = propose(&data, &inv.drt, &ProposeOptions::default()).unwrap();
        assert_eq!(
            sel.chosen().processes,
            0,
            "seed {seed}: {} peaks",
            sel.peaks.len()
        );
        let r = sel.chosen().fit.elements[0].params[0].value;
        assert!((r / 10.0 - 1.0).abs() < 0.003, "{r}");
    }
}
