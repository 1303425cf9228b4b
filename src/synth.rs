//! Analytical impedance elements and their distributions of relaxation times,
//! for tests, benchmarks and the demo.
//!
//! Every element here has a published closed-form impedance and a known DRT,
//! so inversions can be checked against something outside this crate.
//!
//! The elements themselves (impedances, DRTs, references) live in
//! [`crate::circuit::element`] and are re-exported here; this module adds
//! reference cells, noise and sampling grids.

pub use crate::circuit::element::{Element, Series};
use rand::{Rng, RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::f64::consts::PI;

/// Reference cells shared by the tests, the benchmarks and the lambda-rule
/// ladder (examples/lambda_ladder.rs), so that every check runs on the same
/// spectra. Magnitudes are common practice for a cell of about 1 cm2.
pub mod cells {
    use super::{Element, Series};

    /// 10 ohm + Voigt element (50 ohm, 1 ms): one DRT line of 50 ohm at 1 ms.
    pub fn voigt() -> Series {
        Series(vec![
            Element::Resistor { r_ohm: 10.0 },
            Element::Voigt {
                r_ohm: 50.0,
                tau_s: 1e-3,
            },
        ])
    }

    /// 10 ohm + ZARC (50 ohm, 1 ms, phi 0.8): a broad Fuoss-Kirkwood peak.
    pub fn zarc() -> Series {
        Series(vec![
            Element::Resistor { r_ohm: 10.0 },
            Element::Zarc {
                r_ohm: 50.0,
                tau_s: 1e-3,
                phi: 0.8,
            },
        ])
    }

    /// 10 ohm + ZARC (30 ohm, 0.1 ms, 0.85) + ZARC (40 ohm, 1 ms, 0.85).
    pub fn two_zarcs() -> Series {
        Series(vec![
            Element::Resistor { r_ohm: 10.0 },
            Element::Zarc {
                r_ohm: 30.0,
                tau_s: 1e-4,
                phi: 0.85,
            },
            Element::Zarc {
                r_ohm: 40.0,
                tau_s: 1e-3,
                phi: 0.85,
            },
        ])
    }

    /// 5 ohm + ZARC (20 ohm, 0.1 ms, 0.9) + Voigt element (30 ohm, 1 ms): a
    /// broad and a sharp process one decade apart.
    pub fn zarc_plus_voigt() -> Series {
        Series(vec![
            Element::Resistor { r_ohm: 5.0 },
            Element::Zarc {
                r_ohm: 20.0,
                tau_s: 1e-4,
                phi: 0.9,
            },
            Element::Voigt {
                r_ohm: 30.0,
                tau_s: 1e-3,
            },
        ])
    }

    /// 10 mohm + Voigt(20 mohm, 1 ms) + Voigt(30 mohm, 10 ms): two lines one
    /// decade apart, the RC model of a small lithium-ion cell under a pulse.
    pub fn two_voigts() -> Series {
        Series(vec![
            Element::Resistor { r_ohm: 0.010 },
            Element::Voigt {
                r_ohm: 0.020,
                tau_s: 1e-3,
            },
            Element::Voigt {
                r_ohm: 0.030,
                tau_s: 1e-2,
            },
        ])
    }

    /// 5 ohm + finite-length Warburg element (20 ohm, 1 s).
    pub fn finite_warburg() -> Series {
        Series(vec![
            Element::Resistor { r_ohm: 5.0 },
            Element::WarburgFinite {
                r_ohm: 20.0,
                tau_s: 1.0,
            },
        ])
    }

    /// 10 ohm + ZARC (50 ohm, 1 ms, `phi`): one Fuoss-Kirkwood peak.
    pub fn zarc_with_phi(phi: f64) -> Series {
        Series(vec![
            Element::Resistor { r_ohm: 10.0 },
            Element::Zarc {
                r_ohm: 50.0,
                tau_s: 1e-3,
                phi,
            },
        ])
    }

    /// 10 ohm + Havriliak-Negami element (50 ohm, 1 ms, alpha 0.8,
    /// `beta`): one peak, skewed towards short tau for beta < 1.
    pub fn havriliak_negami(beta: f64) -> Series {
        Series(vec![
            Element::Resistor { r_ohm: 10.0 },
            Element::HavriliakNegami {
                r_ohm: 50.0,
                tau_s: 1e-3,
                alpha: 0.8,
                beta,
            },
        ])
    }

    /// 10 ohm + two ZARC (phi 0.9) centred on 1 ms, `separation_decades`
    /// apart, the faster one `r_ratio` times the slower one's 20 ohm.
    pub fn zarc_pair(separation_decades: f64, r_ratio: f64) -> Series {
        let half = 10f64.powf(separation_decades / 2.0);
        Series(vec![
            Element::Resistor { r_ohm: 10.0 },
            Element::Zarc {
                r_ohm: 20.0 * r_ratio,
                tau_s: 1e-3 / half,
                phi: 0.9,
            },
            Element::Zarc {
                r_ohm: 20.0,
                tau_s: 1e-3 * half,
                phi: 0.9,
            },
        ])
    }

    /// 2 ohm + ZARC (10 ohm, 1 ms, 0.85) + reflective finite-length
    /// Warburg element (30 ohm, 10 s): a charge-transfer arc and solid-state
    /// diffusion into finite particles, whose low-frequency branch keeps
    /// rising like a capacitor of 10/30 F.
    pub fn reflective_warburg() -> Series {
        Series(vec![
            Element::Resistor { r_ohm: 2.0 },
            Element::Zarc {
                r_ohm: 10.0,
                tau_s: 1e-3,
                phi: 0.85,
            },
            Element::WarburgReflective {
                r_ohm: 30.0,
                tau_s: 10.0,
            },
        ])
    }

    /// The invented solid-oxide button cell of the demo (`taumap demo`):
    /// R_inf 0.150 ohm, lead inductance 80 nH, ZARC (0.080 ohm, 20 us,
    /// 0.85), ZARC (0.120 ohm, 1 ms, 0.95), finite Warburg (0.050 ohm,
    /// 0.5 s). Illustrative values, not a measurement.
    pub fn demo_button_cell() -> Series {
        Series(vec![
            Element::Resistor { r_ohm: 0.150 },
            Element::Inductor { l_h: 8.0e-8 },
            Element::Zarc {
                r_ohm: 0.080,
                tau_s: 2.0e-5,
                phi: 0.85,
            },
            Element::Zarc {
                r_ohm: 0.120,
                tau_s: 1.0e-3,
                phi: 0.95,
            },
            Element::WarburgFinite {
                r_ohm: 0.050,
                tau_s: 0.5,
            },
        ])
    }

    /// The circuit of the `taumap model` ladder (tests/model.rs,
    /// examples/model_ladder.rs) with `processes` processes for `seed`: a
    /// 20 mOhm series resistor, then processes from fast to slow, 1.4 to 2.2
    /// decades apart from about 10 us, 5-20 mOhm each; each a Voigt
    /// element, a ZARC (phi 0.7-0.95) or, for the slowest of several, a
    /// transmissive finite Warburg element.
    pub fn model_ladder(processes: usize, seed: u64) -> Series {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed * 1000 + processes as u64);
        let mut e = vec![Element::Resistor { r_ohm: 0.02 }];
        let mut log_tau = -5.0 + rng.random_range(-0.3..0.3);
        for k in 0..processes {
            let r_ohm = 0.01 * 10f64.powf(rng.random_range(-0.3..0.3));
            let tau_s = 10f64.powf(log_tau);
            e.push(match rng.random_range(0..3u32) {
                0 => Element::Voigt { r_ohm, tau_s },
                2 if k + 1 == processes && processes > 1 => Element::WarburgFinite {
                    r_ohm,
                    tau_s: tau_s * 2.5,
                },
                _ => Element::Zarc {
                    r_ohm,
                    tau_s,
                    phi: rng.random_range(0.7..0.95),
                },
            });
            log_tau += rng.random_range(1.4..2.2);
        }
        Series(e)
    }
}

/// The reference sampling of the tests and benchmarks: 1e-2 to 1e6 Hz at 10
/// points per decade (81 points), with proportional noise `noise_rel` (none
/// when 0) drawn with `seed` (see [`add_noise`]).
pub fn reference_spectrum(
    cell: &Series,
    noise_rel: f64,
    seed: u64,
) -> crate::Result<crate::io::Spectrum> {
    let f = log_frequencies(1e-2, 1e6, 10.0);
    let (mut re, mut im) = cell.sample(&f);
    if noise_rel > 0.0 {
        add_noise(&mut re, &mut im, noise_rel, seed);
    }
    crate::io::Spectrum::new(f, re, im)
}

/// Log-spaced frequencies from `f_min_hz` to `f_max_hz` inclusive, `per_decade` per decade.
pub fn log_frequencies(f_min_hz: f64, f_max_hz: f64, per_decade: f64) -> Vec<f64> {
    let decades = (f_max_hz / f_min_hz).log10();
    let n = (decades * per_decade).round() as usize + 1;
    (0..n)
        .map(|i| f_min_hz * 10f64.powf(decades * i as f64 / (n - 1).max(1) as f64))
        .collect()
}

/// Adds Gaussian noise of standard deviation `rel * |Z|` to each real and
/// imaginary part (proportional noise, as from an analyser with a relative
/// accuracy), with a ChaCha8 generator seeded by `seed` (reproducible across
/// platforms).
pub fn add_noise(z_re: &mut [f64], z_im: &mut [f64], rel: f64, seed: u64) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    for (re, im) in z_re.iter_mut().zip(z_im.iter_mut()) {
        let m = re.hypot(*im);
        *re += rel * m * normal(&mut rng);
        *im += rel * m * normal(&mut rng);
    }
}

/// Adds Gaussian noise of standard deviation `sigma` to every value (white
/// noise of an instrument channel), with a ChaCha8 generator seeded by `seed`.
pub fn add_white_noise(values: &mut [f64], sigma: f64, seed: u64) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    for v in values.iter_mut() {
        *v += sigma * normal(&mut rng);
    }
}

/// Log-spaced times from `t_min_s` to `t_max_s` inclusive, `per_decade` per decade.
pub fn log_times(t_min_s: f64, t_max_s: f64, per_decade: f64) -> Vec<f64> {
    log_frequencies(t_min_s, t_max_s, per_decade)
}

/// Standard normal deviate by the Box-Muller transform (G. E. P. Box,
/// M. E. Muller (1958), Ann. Math. Statist. 29(2), 610-611).
pub fn normal(rng: &mut impl Rng) -> f64 {
    let u1: f64 = 1.0 - rng.random::<f64>();
    let u2: f64 = rng.random::<f64>();
    (-2.0 * u1.ln()).sqrt() * (2.0 * PI * u2).cos()
}

#[cfg(test)]
mod tests {
    use super::*;
    use num_complex::Complex64;

    /// Integral of a DRT over ln tau by the trapezoid rule on a wide grid.
    fn integral(e: &Element) -> f64 {
        let n = 40_000;
        let (lo, hi) = (-60.0f64, 60.0f64);
        let h = (hi - lo) / n as f64;
        (0..=n)
            .map(|i| {
                let y = lo + h * i as f64;
                let w = if i == 0 || i == n { 0.5 } else { 1.0 };
                w * h * e.gamma_ohm(y.exp()).unwrap_or(0.0)
            })
            .sum()
    }

    /// Reconstructs Z from the DRT, integral gamma/(1 + j w tau) d ln tau.
    fn z_from_drt(e: &Element, w: f64) -> Complex64 {
        let n = 40_000;
        let (lo, hi) = (-60.0f64, 60.0f64);
        let h = (hi - lo) / n as f64;
        (0..=n)
            .map(|i| {
                let y = lo + h * i as f64;
                let g = e.gamma_ohm(y.exp()).unwrap_or(0.0);
                g * h / (1.0 + Complex64::new(0.0, w * y.exp()))
            })
            .sum()
    }

    #[test]
    fn zarc_drt_integrates_to_r_and_reproduces_z() {
        // Fuoss-Kirkwood distribution of the Cole-Cole arc (1941), over the
        // range of phi of the resolution ladder (docs/resolution-ladder.md).
        for phi in [0.6, 0.8, 0.95] {
            let e = Element::Zarc {
                r_ohm: 30.0,
                tau_s: 1e-3,
                phi,
            };
            assert!((integral(&e) - 30.0).abs() < 1e-6, "phi={phi}");
            for w in [10.0, 1e3, 1e5] {
                let (a, b) = (e.impedance(w), z_from_drt(&e, w));
                assert!((a - b).norm() < 1e-6 * 30.0, "phi={phi} w={w}: {a} vs {b}");
            }
        }
    }

    #[test]
    fn havriliak_negami_drt_reproduces_z() {
        // Havriliak & Negami (1967) distribution against their impedance
        // Z - R_inf = integral gamma/(1 + j w tau) d ln tau, including the
        // skewed cases of the resolution ladder (alpha 0.8, beta 0.5-0.8).
        for (alpha, beta) in [(0.7, 0.6), (0.8, 0.5), (0.8, 0.8)] {
            let e = Element::HavriliakNegami {
                r_ohm: 10.0,
                tau_s: 1e-2,
                alpha,
                beta,
            };
            assert!((integral(&e) - 10.0).abs() < 1e-5, "{alpha} {beta}");
            for w in [1.0, 1e2, 1e4] {
                let (a, b) = (e.impedance(w), z_from_drt(&e, w));
                assert!(
                    (a - b).norm() < 1e-5 * 10.0,
                    "{alpha} {beta} w={w}: {a} vs {b}"
                );
            }
        }
    }

    #[test]
    fn warburg_lines_sum_to_impedance() {
        // Partial fractions of tanh(sqrt s)/sqrt s (standard Mittag-Leffler
        // expansion of tanh); the tail beyond n terms decays like 1/n.
        let e = Element::WarburgFinite {
            r_ohm: 20.0,
            tau_s: 1.0,
        };
        let lines = e.lines(200_000);
        for w in [0.1, 1.0, 30.0] {
            let z: Complex64 = lines
                .iter()
                .map(|&(t, r)| r / (1.0 + Complex64::new(0.0, w * t)))
                .sum();
            assert!((z - e.impedance(w)).norm() < 1e-4 * 20.0, "w={w}");
        }
        let total: f64 = e.lines(200_000).iter().map(|l| l.1).sum();
        assert!((total - 20.0).abs() < 1e-3);
        // Secondary lines at 1/9, 1/25, 1/49 of the first.
        let l = e.lines(4);
        for (k, want) in [(1, 1.0 / 9.0), (2, 1.0 / 25.0), (3, 1.0 / 49.0)] {
            assert!((l[k].1 / l[0].1 - want).abs() < 1e-12);
        }
    }

    #[test]
    fn reflective_warburg_lines_and_capacitor_sum_to_impedance() {
        // Partial fractions of coth(sqrt s)/sqrt s = 1/s + sum 2/(k^2 pi^2 + s)
        // (Abramowitz & Stegun 1964, section 4.5): the capacitor tau/R in
        // series with lines that add up to R/3 (Jacobsen & West 1995).
        let e = Element::WarburgReflective {
            r_ohm: 30.0,
            tau_s: 2.0,
        };
        let c_f = e
            .capacitance_f()
            .expect("reflective Warburg has a capacitive branch");
        assert!((c_f - 2.0 / 30.0).abs() < 1e-15);
        let lines = e.lines(200_000);
        for w in [1e-3, 0.1, 1.0, 30.0] {
            let z: Complex64 = lines
                .iter()
                .map(|&(t, r)| r / (1.0 + Complex64::new(0.0, w * t)))
                .sum::<Complex64>()
                + 1.0 / Complex64::new(0.0, w * c_f);
            assert!((z - e.impedance(w)).norm() < 1e-4 * 30.0, "w={w}");
        }
        let total: f64 = lines.iter().map(|l| l.1).sum();
        assert!((total - 10.0).abs() < 1e-3);
        assert!((e.r_pol_ohm() - 10.0).abs() < 1e-12);
        // Low-frequency limit R/3 + R/(j w tau), on both sides of the switch
        // to the Laurent series (|sqrt(j w tau)| = 1e-4).
        for w in [1e-6, 1e-10] {
            let z = e.impedance(w) - 1.0 / Complex64::new(0.0, w * c_f);
            assert!((z - Complex64::new(10.0, 0.0)).norm() < 1e-4, "w={w}: {z}");
        }
        // The k-th line is 1/k^2 of the first, at tau/(k pi)^2.
        assert!((lines[0].0 - 2.0 / (PI * PI)).abs() < 1e-15);
        assert!((lines[1].1 / lines[0].1 - 0.25).abs() < 1e-12);
        // High frequency: semi-infinite diffusion R/sqrt(j w tau).
        let w = 1e6;
        let want = 30.0 / Complex64::new(0.0, w * 2.0).sqrt();
        assert!((e.impedance(w) - want).norm() < 1e-12 * want.norm());
    }

    /// Step response of the reflective Warburg element: at short times
    /// semi-infinite diffusion, 2 R sqrt(t/(pi tau)) (A&S 29.3.4, as for the
    /// transmissive one); at long times the low-frequency form
    /// R/3 + R/(s tau) gives R/3 + R t/tau, less the slowest line's
    /// 2R/pi^2 exp(-pi^2 t/tau).
    #[test]
    fn reflective_warburg_step_response_limits() {
        let s = Series(vec![Element::WarburgReflective {
            r_ohm: 1.0,
            tau_s: 1.0,
        }]);
        for t in [1e-6, 1e-4] {
            let want = 2.0 * (t / PI).sqrt();
            let got = s.current_step_ohm(t);
            assert!((got / want - 1.0).abs() < 1e-6, "t={t}: {got} vs {want}");
        }
        let t = 0.5;
        let want = 1.0 / 3.0 + t - 2.0 / (PI * PI) * (-PI * PI * t).exp();
        let got = s.current_step_ohm(t);
        assert!((got - want).abs() < 1e-6, "{got} vs {want}");
        assert!((s.capacitance_f().expect("has a capacitor") - 1.0).abs() < 1e-15);
    }

    #[test]
    fn voigt_closed_form() {
        // Re = R/(1 + w^2 tau^2), Im = -R w tau/(1 + w^2 tau^2).
        let e = Element::Voigt {
            r_ohm: 50.0,
            tau_s: 1e-3,
        };
        let z = e.impedance(1e3);
        assert!((z.re - 25.0).abs() < 1e-12);
        assert!((z.im + 25.0).abs() < 1e-12);
    }

    #[test]
    fn noise_is_reproducible_and_scaled() {
        let (mut a, mut b) = (vec![10.0; 2000], vec![0.0; 2000]);
        add_noise(&mut a, &mut b, 0.01, 7);
        let (mut c, mut d) = (vec![10.0; 2000], vec![0.0; 2000]);
        add_noise(&mut c, &mut d, 0.01, 7);
        assert_eq!(a, c);
        let var: f64 = b.iter().map(|x| x * x).sum::<f64>() / 2000.0;
        assert!((var.sqrt() - 0.1).abs() < 0.01, "std {}", var.sqrt());
    }
    /// Short- and long-time limits of the ZARC step response. The response of
    /// R/(1 + (s tau0)^phi) to a unit current step is R [1 - E_phi(-(t/tau0)^phi)]
    /// with the Mittag-Leffler function E_phi, whose series gives
    /// 1 - E ~ x^phi / Gamma(1 + phi) for t << tau0 and whose asymptotic
    /// expansion gives E ~ x^-phi / Gamma(1 - phi) for t >> tau0
    /// (R. Gorenflo, A. A. Kilbas, F. Mainardi, S. V. Rogosin (2014),
    /// *Mittag-Leffler Functions, Related Topics and Applications*, Springer,
    /// ch. 3; recalled from memory). With phi = 1/2: Gamma(3/2) = sqrt(pi)/2,
    /// Gamma(1/2) = sqrt(pi).
    #[test]
    fn zarc_step_response_limits() {
        let e = Element::Zarc {
            r_ohm: 2.0,
            tau_s: 1e-2,
            phi: 0.5,
        };
        let s = Series(vec![e]);
        let x: f64 = 1e-8;
        let want = 2.0 * x.sqrt() / (PI.sqrt() / 2.0);
        let got = s.current_step_ohm(x * 1e-2);
        assert!((got / want - 1.0).abs() < 2e-3, "{got} vs {want}");
        let x: f64 = 1e8;
        let want = 2.0 / x.sqrt() / PI.sqrt();
        let got = s.relaxation_ohm(x * 1e-2);
        assert!((got / want - 1.0).abs() < 2e-3, "{got} vs {want}");
        // Fully unrelaxed at t -> 0: the whole resistance.
        assert!((s.relaxation_ohm(1e-30) - 2.0).abs() < 1e-9);
    }

    /// At short times a finite Warburg behaves as semi-infinite diffusion,
    /// Z = R / sqrt(s tau), whose unit-step response is 2 R sqrt(t/(pi tau))
    /// (Laplace pair 1/s^(3/2) <-> 2 sqrt(t/pi); standard transform tables,
    /// e.g. Abramowitz & Stegun 29.3.4). At long times it relaxes as its
    /// slowest line, 8R/pi^2 exp(-pi^2 t / (4 tau)).
    #[test]
    fn warburg_step_response_limits() {
        let s = Series(vec![Element::WarburgFinite {
            r_ohm: 1.0,
            tau_s: 1.0,
        }]);
        for t in [1e-6, 1e-4] {
            let want = 2.0 * (t / PI).sqrt();
            let got = s.current_step_ohm(t);
            assert!((got / want - 1.0).abs() < 1e-6, "t={t}: {got} vs {want}");
        }
        let t = 3.0;
        let want = 8.0 / (PI * PI) * (-PI * PI * t / 4.0).exp();
        assert!((s.relaxation_ohm(t) / want - 1.0).abs() < 1e-9);
    }

    /// A series R + Voigt + C under a current step: R + R1 (1 - e^-t/tau) + t/C.
    #[test]
    fn voigt_and_capacitor_step_response() {
        let s = Series(vec![
            Element::Resistor { r_ohm: 0.5 },
            Element::Inductor { l_h: 1e-6 },
            Element::Voigt {
                r_ohm: 2.0,
                tau_s: 1e-3,
            },
            Element::Capacitor { c_f: 10.0 },
        ]);
        let t = 2e-3;
        let want = 0.5 + 2.0 * (1.0 - (-2.0f64).exp()) + t / 10.0;
        assert!((s.current_step_ohm(t) - want).abs() < 1e-14);
        assert!((s.relaxation_ohm(t) - 2.0 * (-2.0f64).exp()).abs() < 1e-14);
    }
}
