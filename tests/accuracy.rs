//! Accuracy of the inversion against analytical DRTs of published elements.
//!
//! Every check names its source beside it. Synthetic spectra span 1e-2 to
//! 1e6 Hz at 10 points per decade unless said otherwise; noise is proportional
//! Gaussian with a fixed seed.

use taumap::io::Spectrum;
use taumap::kernel::BasisKind;
use taumap::lambda::LambdaRule;
use taumap::pipeline::{
    DrtOptions, InductanceMode, InvertParams, LambdaChoice, SpectrumInversion, invert,
};
use taumap::synth::{Element, Series, cells, log_frequencies, reference_spectrum};

fn spectrum(cell: &Series, noise: f64, seed: u64) -> Spectrum {
    reference_spectrum(cell, noise, seed).unwrap()
}

fn run(s: &Spectrum) -> SpectrumInversion {
    invert(s, &InvertParams::default()).unwrap()
}

fn decades(a: f64, b: f64) -> f64 {
    (a / b).log10().abs()
}

/// Voigt element R || C with R = 50 ohm, C = 20 uF (tau = RC = 1 ms; common
/// practice for a charge-transfer resistance and a double layer on 1 cm2).
/// Its DRT is one line of weight R at tau = RC (textbook RC relation).
#[test]
fn voigt_element_gives_one_peak_at_rc() {
    let (r, c) = (50.0, 20e-6);
    let cell = Series(vec![
        Element::Resistor { r_ohm: 10.0 },
        Element::Voigt {
            r_ohm: r,
            tau_s: r * c,
        },
    ]);
    let inv = run(&spectrum(&cell, 0.0, 0));
    assert_eq!(inv.drt.peaks.len(), 1, "{:?}", inv.drt.peaks);
    assert!(
        decades(inv.drt.peaks[0].tau_s, 1e-3) < 0.05,
        "tau {}",
        inv.drt.peaks[0].tau_s
    );
    assert!(
        (inv.drt.total - r).abs() < 0.01 * r,
        "r_pol {}",
        inv.drt.total
    );
    assert!((inv.drt.peaks[0].area - r).abs() < 0.01 * r);
    assert!((inv.drt.series.instantaneous.unwrap() - 10.0).abs() < 0.1);
}

/// ZARC R/(1 + (j w tau0)^phi): its DRT is the Fuoss-Kirkwood distribution
/// (Fuoss & Kirkwood 1941, J. Am. Chem. Soc. 63, 385), checked at 0.1 % noise.
#[test]
fn zarc_matches_fuoss_kirkwood_distribution() {
    let zarc = Element::Zarc {
        r_ohm: 50.0,
        tau_s: 1e-3,
        phi: 0.8,
    };
    let cell = Series(vec![Element::Resistor { r_ohm: 10.0 }, zarc]);
    let inv = run(&spectrum(&cell, 0.001, 3));
    let main = inv
        .drt
        .peaks
        .iter()
        .max_by(|a, b| a.area.total_cmp(&b.area))
        .unwrap();
    assert!(decades(main.tau_s, 1e-3) < 0.05, "tau {}", main.tau_s);
    assert!(
        (inv.drt.total - 50.0).abs() < 0.5,
        "r_pol {}",
        inv.drt.total
    );
    // Shape: relative L2 distance to the analytical gamma over the band.
    let (mut err, mut norm) = (0.0, 0.0);
    for (t, g) in inv.drt.tau_s.iter().zip(&inv.drt.gamma) {
        let want = zarc.gamma_ohm(*t).unwrap();
        err += (g - want).powi(2);
        norm += want * want;
    }
    let rel = (err / norm).sqrt();
    assert!(rel < 0.15, "relative L2 error of gamma {rel}");
    // The peak height (analytical R/(2 pi) sin(0.2 pi)/(1 - cos(0.2 pi)) = 24.5 ohm).
    let peak_want = 50.0 / (2.0 * std::f64::consts::PI) * (0.2 * std::f64::consts::PI).sin()
        / (1.0 - (0.2 * std::f64::consts::PI).cos());
    assert!(
        (main.height - peak_want).abs() < 0.1 * peak_want,
        "{} vs {peak_want}",
        main.height
    );
}

/// Finite-length Warburg R tanh(sqrt(j w tau))/sqrt(j w tau): lines at
/// tau/((n - 1/2)^2 pi^2) with weights 2R/((n - 1/2)^2 pi^2) (partial
/// fractions of tanh(sqrt s)/sqrt s). The slowest, strongest line (n = 1,
/// 81 % of R) must be found where it belongs.
#[test]
fn finite_warburg_first_line() {
    let w = Element::WarburgFinite {
        r_ohm: 20.0,
        tau_s: 1.0,
    };
    let (tau1, r1) = w.lines(1)[0];
    let cell = Series(vec![Element::Resistor { r_ohm: 5.0 }, w]);
    let inv = run(&spectrum(&cell, 0.0, 0));
    let slowest = inv.drt.peaks.last().unwrap();
    assert!(
        decades(slowest.tau_s, tau1) < 0.05,
        "tau {} vs {tau1}",
        slowest.tau_s
    );
    assert!(
        (slowest.area - r1).abs() < 0.05 * r1,
        "r {} vs {r1}",
        slowest.area
    );
    assert!((inv.drt.total - 20.0).abs() < 0.01 * 20.0);
}

/// Two ZARCs one decade apart: both found, each within 0.1 decade.
#[test]
fn two_zarcs_one_decade_apart() {
    let cell = cells::two_zarcs();
    for noise in [0.0, 0.001] {
        let inv = run(&spectrum(&cell, noise, 5));
        assert_eq!(inv.drt.peaks.len(), 2, "noise {noise}: {:?}", inv.drt.peaks);
        assert!(decades(inv.drt.peaks[0].tau_s, 1e-4) < 0.1);
        assert!(decades(inv.drt.peaks[1].tau_s, 1e-3) < 0.1);
        assert!((inv.drt.total - 70.0).abs() < 0.01 * 70.0);
    }
}

/// ZARC plus Voigt element one decade apart with 1 % noise: both peaks within
/// 0.1 decade and R_pol within 3 % (the acceptance case of the invert issue).
#[test]
fn zarc_plus_voigt_at_one_percent_noise() {
    let cell = cells::zarc_plus_voigt();
    for seed in [1, 2, 3] {
        let inv = run(&spectrum(&cell, 0.01, seed));
        assert_eq!(inv.drt.peaks.len(), 2, "seed {seed}: {:?}", inv.drt.peaks);
        assert!(
            decades(inv.drt.peaks[0].tau_s, 1e-4) < 0.1,
            "seed {seed}: {:?}",
            inv.drt.peaks
        );
        assert!(
            decades(inv.drt.peaks[1].tau_s, 1e-3) < 0.1,
            "seed {seed}: {:?}",
            inv.drt.peaks
        );
        assert!(
            (inv.drt.total - 50.0).abs() < 0.03 * 50.0,
            "seed {seed}: {}",
            inv.drt.total
        );
    }
}

/// A series inductance j w L (wiring) is recovered, and R_inf is not pulled
/// down by it; a spectrum without inductance is fitted without L in auto mode,
/// and with L forced on gets a small L and an R_inf within 2 % (R_inf, L and
/// DRT mass at the shortest tau trade off to second order in w tau, so forcing
/// L costs some accuracy; common practice).
#[test]
fn inductance_recovered_and_not_traded_against_r_inf() {
    let base = vec![
        Element::Resistor { r_ohm: 10.0 },
        Element::Zarc {
            r_ohm: 40.0,
            tau_s: 1e-3,
            phi: 0.9,
        },
    ];
    let mut with_l = base.clone();
    with_l.push(Element::Inductor { l_h: 1e-6 });
    let inv = run(&spectrum(&Series(with_l), 0.001, 9));
    let l = inv
        .drt
        .series
        .inductance_h
        .expect("inductance modelled in auto mode");
    assert!((l / 1e-6 - 1.0).abs() < 0.02, "L {l}");
    assert!(
        (inv.drt.series.instantaneous.unwrap() - 10.0).abs() < 0.1,
        "r_inf {}",
        inv.drt.series.instantaneous.unwrap()
    );

    let s = spectrum(&Series(base), 0.001, 9);
    let forced = invert(
        &s,
        &InvertParams {
            inductance: InductanceMode::On,
            ..Default::default()
        },
    )
    .unwrap();
    let auto = run(&s);
    assert!(auto.drt.series.inductance_h.is_none());
    assert!(
        (auto.drt.series.instantaneous.unwrap() - 10.0).abs() < 0.05,
        "r_inf {}",
        auto.drt.series.instantaneous.unwrap()
    );
    assert!(
        forced.drt.series.inductance_h.unwrap() < 1e-8,
        "spurious L {:?}",
        forced.drt.series.inductance_h
    );
    assert!(
        (forced.drt.series.instantaneous.unwrap() - 10.0).abs() < 0.2,
        "r_inf {}",
        forced.drt.series.instantaneous.unwrap()
    );
    assert!(
        (forced.drt.total - auto.drt.total).abs() < 0.01 * auto.drt.total,
        "r_pol {} (L forced) vs {} (auto), L {:?}",
        forced.drt.total,
        auto.drt.total,
        forced.drt.series.inductance_h
    );
}

/// The extended tau range must not invent resistance from noise: at 1 %
/// noise, R_pol of a ZARC stays within 3 % over several seeds.
#[test]
fn extension_does_not_invent_resistance() {
    let cell = cells::zarc();
    for seed in 20..25 {
        let inv = run(&spectrum(&cell, 0.01, seed));
        assert!(
            (inv.drt.total - 50.0).abs() < 1.5,
            "seed {seed}: r_pol {}",
            inv.drt.total
        );
        assert!(
            (inv.drt.series.instantaneous.unwrap() - 10.0).abs() < 0.5,
            "seed {seed}: r_inf {}",
            inv.drt.series.instantaneous.unwrap()
        );
    }
}

/// Invariances of the model (exact properties of the integral equation):
/// Z times k gives gamma times k; frequencies times a move every peak by 1/a;
/// gamma >= 0 everywhere.
#[test]
fn invariances() {
    let cell = Series(vec![
        Element::Resistor { r_ohm: 10.0 },
        Element::Zarc {
            r_ohm: 30.0,
            tau_s: 1e-4,
            phi: 0.85,
        },
        Element::Voigt {
            r_ohm: 20.0,
            tau_s: 1e-2,
        },
    ]);
    let s = spectrum(&cell, 0.001, 4);
    let a = run(&s);
    assert!(a.drt.gamma.iter().all(|g| *g >= 0.0));
    let k = 7.5;
    let b = run(&s.scaled(k));
    assert!(
        (b.drt.lambda.lambda / a.drt.lambda.lambda - 1.0).abs() < 1e-9,
        "lambda is scale-free"
    );
    for (x, y) in a.drt.gamma.iter().zip(&b.drt.gamma) {
        assert!((y - k * x).abs() <= 1e-6 * k * a.drt.gamma.iter().copied().fold(0.0, f64::max));
    }
    assert!((b.drt.total - k * a.drt.total).abs() < 1e-6 * k * a.drt.total);

    let scale = 3.0;
    let shifted = Spectrum::new(
        s.frequency_hz.iter().map(|f| f * scale).collect(),
        s.z_re_ohm.clone(),
        s.z_im_ohm.clone(),
    )
    .unwrap();
    let c = run(&shifted);
    assert_eq!(a.drt.peaks.len(), c.drt.peaks.len());
    for (p, q) in a.drt.peaks.iter().zip(&c.drt.peaks) {
        assert!(
            (q.tau_s * scale / p.tau_s - 1.0).abs() < 1e-6,
            "{} vs {}",
            p.tau_s,
            q.tau_s
        );
        assert!((q.area - p.area).abs() < 1e-6 * p.area);
    }
}

/// Every code path agrees: each lambda rule and each basis gives R_pol within
/// 2 % of the truth on a well-posed spectrum (0.1 % noise).
#[test]
fn every_rule_and_basis_agree_on_r_pol() {
    let cell = cells::zarc();
    let s = spectrum(&cell, 0.001, 8);
    for basis in [BasisKind::Gaussian, BasisKind::Hat] {
        for rule in LambdaRule::ALL {
            for order in [0, 1] {
                let p = InvertParams {
                    drt: DrtOptions {
                        basis,
                        penalty_order: order,
                        lambda: LambdaChoice::Rule(rule),
                        ..Default::default()
                    },
                    ..Default::default()
                };
                let inv = invert(&s, &p).unwrap();
                assert!(
                    (inv.drt.total - 50.0).abs() < 1.0,
                    "{basis} {rule} k={order}: r_pol {}",
                    inv.drt.total
                );
            }
        }
    }
}

/// Degenerate inputs give a result or a clear error, never a panic.
#[test]
fn small_and_degenerate_spectra() {
    for n in 1..=4usize {
        let f: Vec<f64> = (0..n).map(|i| 10f64.powi(i as i32)).collect();
        let s = Spectrum::new(f, vec![1.0; n], vec![-0.5; n]).unwrap();
        let r = invert(&s, &InvertParams::default());
        if n < 3 {
            assert!(r.is_err());
        } else {
            assert!(
                r.unwrap()
                    .drt
                    .gamma
                    .iter()
                    .all(|g| g.is_finite() && *g >= 0.0)
            );
        }
    }
    // A pure resistor: all-zero imaginary part, no process.
    let f = log_frequencies(1.0, 1e4, 10.0);
    let n = f.len();
    let inv = invert(
        &Spectrum::new(f, vec![5.0; n], vec![0.0; n]).unwrap(),
        &InvertParams::default(),
    )
    .unwrap();
    assert!((inv.drt.series.instantaneous.unwrap() - 5.0).abs() < 1e-6);
    assert!(inv.drt.total < 1e-6);
    assert!(inv.drt.peaks.is_empty());
}

/// Reported peaks of at least 5 % of the largest true resistance that lie
/// more than 0.15 decade from every true time constant (the spurious-peak
/// count of docs/resolution-ladder.md, with a tighter match).
fn spurious(inv: &SpectrumInversion, taus: &[f64], largest_ohm: f64) -> usize {
    inv.drt
        .peaks
        .iter()
        .filter(|p| p.area >= 0.05 * largest_ohm)
        .filter(|p| taus.iter().all(|t| decades(p.tau_s, *t) > 0.15))
        .count()
}

fn zarc(r_ohm: f64, tau_s: f64, phi: f64) -> Element {
    Element::Zarc { r_ohm, tau_s, phi }
}

fn voigt(r_ohm: f64, tau_s: f64) -> Element {
    Element::Voigt { r_ohm, tau_s }
}

/// The default (adaptive) penalty leaves no spurious peak beside a Voigt
/// element and a broad ZARC two decades apart, nor between two ZARCs
/// (phi 0.9) one decade apart, at 0.1 % noise, seeds 1-5, finds every
/// process within 0.1 decade and R_pol within 1 %; the global penalty
/// alone shows side peaks on the same spectra (measured: 5 of the 20
/// inversions). Distributions: lines of the Voigt elements at RC
/// (textbook), maxima of the ZARCs at tau0 (R. M. Fuoss and J. G.
/// Kirkwood, J. Am. Chem. Soc. 63, 385, 1941).
#[test]
fn no_spurious_peak_beside_voigt_lines_and_zarc_pairs() {
    let r0 = |r_ohm| Element::Resistor { r_ohm };
    let (fast, slow) = (10f64.powf(-3.5), 10f64.powf(-2.5));
    let cases = [
        (
            Series(vec![r0(5.0), voigt(30.0, 1e-5), zarc(20.0, 1e-3, 0.7)]),
            [1e-5, 1e-3],
            30.0,
        ),
        (
            Series(vec![r0(5.0), zarc(40.0, 1e-5, 0.75), voigt(10.0, 1e-3)]),
            [1e-5, 1e-3],
            40.0,
        ),
        (
            Series(vec![r0(10.0), zarc(20.0, fast, 0.9), zarc(20.0, slow, 0.9)]),
            [fast, slow],
            20.0,
        ),
        (
            Series(vec![r0(10.0), zarc(40.0, fast, 0.9), zarc(20.0, slow, 0.9)]),
            [fast, slow],
            40.0,
        ),
    ];
    let global = InvertParams {
        drt: DrtOptions {
            adaptive: None,
            ..DrtOptions::default()
        },
        ..InvertParams::default()
    };
    let (mut global_spurious, mut adaptive_spurious) = (0, 0);
    for (k, (cell, taus, largest)) in cases.iter().enumerate() {
        for seed in 1..=5 {
            let s = spectrum(cell, 1e-3, seed);
            let inv = run(&s);
            adaptive_spurious += spurious(&inv, taus, *largest);
            assert_eq!(
                spurious(&inv, taus, *largest),
                0,
                "case {k} seed {seed}: {:?}",
                inv.drt.peaks
            );
            for t in taus {
                assert!(
                    inv.drt.peaks.iter().any(|p| decades(p.tau_s, *t) < 0.1),
                    "case {k} seed {seed}: nothing at {t}: {:?}",
                    inv.drt.peaks
                );
            }
            let want = cell.r_pol_ohm();
            assert!(
                (inv.drt.total / want - 1.0).abs() < 0.01,
                "case {k} seed {seed}"
            );
            global_spurious += spurious(&invert(&s, &global).unwrap(), taus, *largest).min(1);
        }
    }
    // The reason for the adaptive default: the global penalty alone is
    // worse on the same spectra.
    assert!(global_spurious > adaptive_spurious, "{global_spurious}");
}

/// A resistor in series with a capacitor (a blocking electrode without
/// any relaxation), exact data: the distribution is zero to rounding and
/// no peak is reported (measured before the rounding floor of the peak
/// area: two "peaks" of 5e-15 and 1e-13 ohm).
#[test]
fn an_exact_r_c_has_no_peak() {
    let cell = Series(vec![
        Element::Resistor { r_ohm: 1.0 },
        Element::Capacitor { c_f: 1e-3 },
    ]);
    let inv = run(&spectrum(&cell, 0.0, 0));
    assert!(inv.drt.peaks.is_empty(), "{:?}", inv.drt.peaks);
    assert!(inv.drt.total < 1e-9, "{}", inv.drt.total);
    let c = inv.drt.series.series_capacitance_f.unwrap();
    assert!((c / 1e-3 - 1.0).abs() < 1e-6, "{c}");
}
