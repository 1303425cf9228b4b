//! Invariants of the spectrum inversion, checked on seeded random cells.
//!
//! Each property follows from the model, not from a golden value:
//!
//! $$ Z(\omega) = R_\infty + j\omega L
//!    + \int \frac{\gamma(\ln\tau)}{1 + j\omega\tau}\, d\ln\tau $$
//!
//! - it is linear in `(R_inf, L, gamma)`, so `k Z` is explained by
//!   `(k R_inf, k L, k gamma)` (linearity of the Fredholm equation of the
//!   first kind; the inversion scales the data by `max |Z|` to make lambda
//!   dimensionless, see `src/pipeline/spectrum.rs`);
//! - the kernel `1/(1 + j omega tau)` depends on `omega tau` alone, so
//!   frequencies times `a` are explained by every time constant divided by
//!   `a` (and `L` divided by `a`, since `omega L` is unchanged);
//! - a spectrum is a set of points: the order of the rows of its file carries
//!   no information (common practice: instruments write ascending or
//!   descending sweeps).
//!
//! The byte-identity of the CLI outputs across runs and thread counts lives
//! with the other CLI tests (`tests/cli/plots.rs`).
//!
//! Case counts are small and the seed fixed, so the file runs in a few
//! seconds and a failure reproduces on every machine.

use proptest::prelude::*;
use proptest::test_runner::RngSeed;
use std::path::Path;
use taumap::io::Spectrum;
use taumap::io::spectrum::parse_spectrum;
use taumap::pipeline::{DEFAULT_RULE, InvertParams, LambdaChoice, SpectrumInversion, invert};
use taumap::synth::{Element, Series, add_noise, log_frequencies};

/// Relative tolerance of the scaling invariants, applied to the largest
/// value of each compared quantity (max gamma, max |Z|).
///
/// Why 1e-5: the scaled problem differs from the unscaled one only by the
/// rounding of the data (`k z / |k z|`, or `omega tau` on a shifted grid: a
/// few ulps). The regularised normal matrix has a condition number up to
/// about `||A||^2 / lambda`, of order 1e8 at the default lambda floor of
/// 1e-6, so the rounding moves the solution and the rule's interpolated
/// lambda by up to ~1e-8..1e-7 of their size. Measured over 300 cases per
/// property (same strategies): lambda within 1.5e-8 relative, gamma within
/// 1.7e-7 of its maximum, R_inf and R_pol within 6e-12 of max |Z|. 1e-5
/// keeps a margin of 60 over the worst and is still three orders below the
/// smallest change the inversion makes on purpose (a peak under 3 % of
/// R_pol is not reported).
const REL_TOL: f64 = 1e-5;

/// Tolerance on a peak's `log10 tau` (decades). The peak position is the
/// vertex of a parabola through three samples of gamma, 0.02 decade apart at
/// the defaults (10 points per decade, 5 output samples per step); the
/// sample errors above move it by a few 1e-7 decade (measured 2.7e-7 over
/// 300 cases). 1e-5 decade keeps a margin of 35 and is 2000 times finer
/// than a sample step.
const TAU_TOL_DECADES: f64 = 1e-5;

/// Frequencies of the checks: 1e-2 to 1e6 Hz at 10 per decade (81 points),
/// the reference sampling of `taumap::synth::reference_spectrum`.
fn frequencies_hz() -> Vec<f64> {
    log_frequencies(1e-2, 1e6, 10.0)
}

/// A random cell: R_inf, a ZARC (Cole & Cole 1941, J. Chem. Phys. 9,
/// 341-351), a Voigt element and an optional lead inductance, each with
/// magnitudes common in practice for a cell of about 1 cm2; and how it is
/// measured and inverted: either with proportional noise (0.01 % to 1 %,
/// a seed) and lambda chosen by the default rule, or exact with a fixed
/// lambda.
///
/// Exact data with the default rule are left out on purpose: there the
/// rule's noise estimate comes from the flat, rounding-dominated low end of
/// the GCV curve (lambda ~1e-8, condition ~1e10), and a rounding-level
/// change of the data moves the chosen lambda by ~1 % (gamma by ~4e-4 of
/// its maximum). A fixed lambda isolates the linearity of the solve there.
#[derive(Clone, Debug)]
struct Case {
    cell: Series,
    noise_rel: f64,
    seed: u64,
    lambda: LambdaChoice,
}

fn case() -> impl Strategy<Value = Case> {
    (
        1.0f64..20.0,
        (5.0f64..100.0, -5.0f64..-1.0, 0.75f64..1.0),
        (5.0f64..50.0, -4.0f64..0.0),
        proptest::option::of(-8.0f64..-6.0),
        prop_oneof![
            (-4.0f64..-2.0).prop_map(|lg| (10f64.powf(lg), None)),
            (-6.0f64..-2.0).prop_map(|lg| (0.0, Some(10f64.powf(lg)))),
        ],
        any::<u64>(),
    )
        .prop_map(
            |(
                r_inf,
                (r_zarc, lg_tau_zarc, phi),
                (r_voigt, lg_tau_voigt),
                lg_l,
                (noise_rel, fixed_lambda),
                seed,
            )| {
                let mut elements = vec![
                    Element::Resistor { r_ohm: r_inf },
                    Element::Zarc {
                        r_ohm: r_zarc,
                        tau_s: 10f64.powf(lg_tau_zarc),
                        phi,
                    },
                    Element::Voigt {
                        r_ohm: r_voigt,
                        tau_s: 10f64.powf(lg_tau_voigt),
                    },
                ];
                if let Some(lg_l) = lg_l {
                    elements.push(Element::Inductor {
                        l_h: 10f64.powf(lg_l),
                    });
                }
                Case {
                    cell: Series(elements),
                    noise_rel,
                    seed,
                    lambda: fixed_lambda
                        .map_or(LambdaChoice::Rule(DEFAULT_RULE), LambdaChoice::Fixed),
                }
            },
        )
}

impl Case {
    fn spectrum(&self, frequency_hz: &[f64]) -> Spectrum {
        let (mut re, mut im) = self.cell.sample(frequency_hz);
        if self.noise_rel > 0.0 {
            add_noise(&mut re, &mut im, self.noise_rel, self.seed);
        }
        Spectrum::new(frequency_hz.to_vec(), re, im).expect("a synthetic spectrum is valid")
    }

    fn run(&self, s: &Spectrum) -> SpectrumInversion {
        let mut params = InvertParams::default();
        params.drt.lambda = self.lambda;
        invert(s, &params).expect("a valid spectrum inverts")
    }
}

/// A fixed seed: every run draws the same cases, so a failure reproduces
/// without a regressions file (none is written).
fn config(cases: u32, seed: u64) -> ProptestConfig {
    ProptestConfig {
        cases,
        rng_seed: RngSeed::Fixed(seed),
        failure_persistence: None,
        ..ProptestConfig::default()
    }
}

fn max_modulus(s: &Spectrum) -> f64 {
    s.z_re_ohm
        .iter()
        .zip(&s.z_im_ohm)
        .map(|(r, i)| r.hypot(*i))
        .fold(0.0, f64::max)
}

/// `|got - want| <= REL_TOL * scale`, with a message naming the quantity.
fn close(what: &str, got: f64, want: f64, scale: f64) -> Result<(), TestCaseError> {
    prop_assert!(
        (got - want).abs() <= REL_TOL * scale,
        "{what}: got {got:e}, want {want:e} (tolerance {:e})",
        REL_TOL * scale
    );
    Ok(())
}

fn bits(v: &[f64]) -> Vec<u64> {
    v.iter().map(|x| x.to_bits()).collect()
}

/// Checks that `b` is the inversion `a` with every resistance-like quantity
/// times `k` and every time constant times `t`; the inductance scales by
/// `k t` (omega L is a resistance, omega scales by 1/t).
fn assert_mapped(
    a: &SpectrumInversion,
    b: &SpectrumInversion,
    k: f64,
    t: f64,
    z_scale_ohm: f64,
) -> Result<(), TestCaseError> {
    let (a, b) = (&a.drt, &b.drt);
    // lambda is dimensionless: the same choice on the same grid.
    close("lambda", b.lambda.lambda, a.lambda.lambda, a.lambda.lambda)?;
    let gamma_max = a.gamma.iter().copied().fold(0.0, f64::max);
    prop_assert_eq!(a.gamma.len(), b.gamma.len());
    for (j, (ga, gb)) in a.gamma.iter().zip(&b.gamma).enumerate() {
        close(&format!("gamma_ohm[{j}]"), *gb, k * ga, k * gamma_max)?;
    }
    for (ta, tb) in a.tau_s.iter().zip(&b.tau_s) {
        // The grid is built from the band 1/(2 pi f): it moves as a whole,
        // up to the rounding of ln tau (measured 7e-15 relative; 1e-12).
        prop_assert!((tb / (t * ta) - 1.0).abs() < 1e-12, "tau {ta} vs {tb}");
    }
    close("r_pol_ohm", b.total, k * a.total, k * z_scale_ohm)?;
    let (ra, rb) = (a.series.instantaneous, b.series.instantaneous);
    prop_assert_eq!(ra.is_some(), rb.is_some());
    if let (Some(ra), Some(rb)) = (ra, rb) {
        close("r_inf_ohm", rb, k * ra, k * z_scale_ohm)?;
    }
    let (la, lb) = (a.series.inductance_h, b.series.inductance_h);
    prop_assert_eq!(la.is_some(), lb.is_some(), "inductance modelled in both");
    if let (Some(la), Some(lb)) = (la, lb) {
        // Scale of L: the one that gives max |Z| at the highest frequency.
        let l_scale = z_scale_ohm / (2.0 * std::f64::consts::PI * 1e6);
        close("inductance_h", lb, k * t * la, k * t * l_scale)?;
    }
    prop_assert_eq!(
        a.peaks.len(),
        b.peaks.len(),
        "peaks {:?} vs {:?}",
        a.peaks,
        b.peaks
    );
    for (pa, pb) in a.peaks.iter().zip(&b.peaks) {
        prop_assert!(
            (pb.tau_s.log10() - (t * pa.tau_s).log10()).abs() < TAU_TOL_DECADES,
            "peak tau {:e} s vs {:e} s expected",
            pb.tau_s,
            t * pa.tau_s
        );
        close("peak r_ohm", pb.area, k * pa.area, k * z_scale_ohm)?;
    }
    Ok(())
}

proptest! {
    #![proptest_config(config(16, 0x7a75_0001))]

    /// Z times k (1e-3 to 1e3) gives gamma, R_pol, R_inf, L and every
    /// peak's r_ohm times k, the same lambda and the same peak taus:
    /// linearity of the model in (R_inf, L, gamma).
    #[test]
    fn scaling_the_impedance_scales_every_resistance(c in case(), lg_k in -3.0f64..3.0) {
        let k = 10f64.powf(lg_k);
        let s = c.spectrum(&frequencies_hz());
        let a = c.run(&s);
        let b = c.run(&s.scaled(k));
        assert_mapped(&a, &b, k, 1.0, max_modulus(&s))?;
    }

    /// Z times a power of two, 2^-20 to 2^20: every scaled quantity is exact
    /// in floating point (the weights `1/|Z|` and the data's scale change by
    /// the same power of two), so the result is the unscaled one times k bit
    /// for bit (IEEE 754: multiplying by a power of two is exact away from
    /// overflow and subnormals).
    #[test]
    fn scaling_by_a_power_of_two_is_exact(c in case(), e in -20i32..=20) {
        let k = 2f64.powi(e);
        let s = c.spectrum(&frequencies_hz());
        let a = c.run(&s);
        let b = c.run(&s.scaled(k));
        let scaled: Vec<f64> = a.drt.gamma.iter().map(|g| g * k).collect();
        prop_assert_eq!(bits(&b.drt.gamma), bits(&scaled));
        prop_assert_eq!(b.drt.total.to_bits(), (k * a.drt.total).to_bits());
        prop_assert_eq!(b.drt.lambda.lambda.to_bits(), a.drt.lambda.lambda.to_bits());
        let fit: Vec<f64> = a.fit.fit_re_ohm.iter().map(|v| v * k).collect();
        prop_assert_eq!(bits(&b.fit.fit_re_ohm), bits(&fit));
    }
}

proptest! {
    #![proptest_config(config(16, 0x7a75_0002))]

    /// Frequencies times a (1e-2 to 1e2) move every peak tau, and the whole
    /// tau grid, by 1/a and keep every resistance: the kernel
    /// 1/(1 + j omega tau) depends on omega tau alone, and the default grid
    /// is derived from the band 1/(2 pi f_max) .. 1/(2 pi f_min).
    #[test]
    fn scaling_the_frequencies_moves_every_tau_inversely(c in case(), lg_a in -2.0f64..2.0) {
        let a = 10f64.powf(lg_a);
        let f = frequencies_hz();
        let s = c.spectrum(&f);
        let moved = Spectrum::new(
            f.iter().map(|v| v * a).collect(),
            s.z_re_ohm.clone(),
            s.z_im_ohm.clone(),
        )
        .unwrap();
        let x = c.run(&s);
        let y = c.run(&moved);
        assert_mapped(&x, &y, 1.0, 1.0 / a, max_modulus(&s))?;
    }
}

/// The spectrum as CSV text with its rows in the order `order`. `{}` prints
/// the shortest decimal that reads back to the same f64.
fn csv(s: &Spectrum, order: &[usize]) -> String {
    let mut text = String::from("frequency_hz,z_re_ohm,z_im_ohm\n");
    for &i in order {
        text.push_str(&format!(
            "{},{},{}\n",
            s.frequency_hz[i], s.z_re_ohm[i], s.z_im_ohm[i]
        ));
    }
    text
}

proptest! {
    #![proptest_config(config(16, 0x7a75_0003))]

    /// Shuffled rows read to the same spectrum and invert to the same bits
    /// as ascending rows (a spectrum is a set of points; common practice).
    #[test]
    fn row_order_does_not_matter(
        c in case(),
        order in Just((0..81).collect::<Vec<usize>>()).prop_shuffle(),
    ) {
        let s = c.spectrum(&frequencies_hz());
        let path = Path::new("shuffled.csv");
        let ascending: Vec<usize> = (0..s.len()).collect();
        let sorted = parse_spectrum(csv(&s, &ascending).as_bytes(), path).unwrap();
        let shuffled = parse_spectrum(csv(&s, &order).as_bytes(), path).unwrap();
        prop_assert_eq!(&sorted, &s, "the text round trip is exact");
        prop_assert_eq!(&shuffled, &s);
        let a = c.run(&sorted);
        let b = c.run(&shuffled);
        prop_assert_eq!(bits(&a.drt.gamma), bits(&b.drt.gamma));
        prop_assert_eq!(bits(&a.drt.coeffs), bits(&b.drt.coeffs));
        prop_assert_eq!(a.drt.total.to_bits(), b.drt.total.to_bits());
        prop_assert_eq!(&a.drt.peaks, &b.drt.peaks);
        prop_assert_eq!(bits(&a.fit.fit_im_ohm), bits(&b.fit.fit_im_ohm));
    }
}
