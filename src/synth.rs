//! Analytical impedance elements and their distributions of relaxation times,
//! for tests, benchmarks and the demo.
//!
//! Every element here has a published closed-form impedance and a known DRT,
//! so inversions can be checked against something outside this crate.
//!
//! # References
//! - K. S. Cole, R. H. Cole (1941), J. Chem. Phys. 9, 341-351 (the depressed
//!   arc R/(1 + (j w tau0)^phi), called ZARC in electrochemistry).
//! - R. M. Fuoss, J. G. Kirkwood (1941), J. Am. Chem. Soc. 63, 385-394
//!   (distribution of relaxation times of that arc).
//! - S. Havriliak, S. Negami (1967), Polymer 8, 161-210.
//! - J. R. Macdonald, W. B. Johnson, in E. Barsoukov, J. R. Macdonald (eds.),
//!   *Impedance Spectroscopy*, 2nd ed. (2005), Wiley, section 2.1 (finite-length
//!   Warburg element with a transmissive boundary, R tanh(sqrt(j w tau))/sqrt(j w tau),
//!   and with a reflective boundary, R coth(sqrt(j w tau))/sqrt(j w tau)).
//! - T. Jacobsen, K. West (1995), "Diffusion impedance in planar, cylindrical and
//!   spherical symmetry", Electrochim. Acta 40(2), 255-262 (both boundaries, and
//!   the capacitive low-frequency limit of the reflective one).
//! - M. Abramowitz, I. A. Stegun (1964), *Handbook of Mathematical Functions*,
//!   section 4.5 (partial-fraction series of tanh and coth, from which the DRT
//!   lines of both Warburg elements follow; equation numbers not at hand).

use num_complex::Complex64;
use rand::{Rng, RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::f64::consts::PI;

/// A two-terminal element with a closed-form impedance.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Element {
    /// Ideal resistor.
    Resistor {
        /// Resistance (ohm).
        r_ohm: f64,
    },
    /// Ideal inductor, Z = j w L.
    Inductor {
        /// Inductance (henry).
        l_h: f64,
    },
    /// Ideal capacitor, Z = 1/(j w C).
    Capacitor {
        /// Capacitance (farad).
        c_f: f64,
    },
    /// Voigt element R || C, Z = R/(1 + j w tau), tau = R C.
    Voigt {
        /// Resistance (ohm).
        r_ohm: f64,
        /// Time constant (s).
        tau_s: f64,
    },
    /// ZARC (Cole-Cole arc), Z = R/(1 + (j w tau0)^phi), 0 < phi <= 1.
    Zarc {
        /// Resistance (ohm).
        r_ohm: f64,
        /// Characteristic time constant (s).
        tau_s: f64,
        /// Dispersion exponent.
        phi: f64,
    },
    /// Havriliak-Negami, Z = R/(1 + (j w tau0)^alpha)^beta.
    HavriliakNegami {
        /// Resistance (ohm).
        r_ohm: f64,
        /// Characteristic time (s).
        tau_s: f64,
        /// Width exponent, 0 < alpha <= 1.
        alpha: f64,
        /// Skew exponent, 0 < beta <= 1.
        beta: f64,
    },
    /// Finite-length Warburg element with a transmissive boundary,
    /// Z = R tanh(sqrt(j w tau)) / sqrt(j w tau).
    WarburgFinite {
        /// Low-frequency resistance (ohm).
        r_ohm: f64,
        /// Diffusion time constant L^2/D (s).
        tau_s: f64,
    },
    /// Finite-length Warburg element with a reflective (blocking) boundary,
    /// Z = R coth(sqrt(j w tau)) / sqrt(j w tau) (Barsoukov & Macdonald 2005,
    /// section 2.1; Jacobsen & West 1995): diffusion into a layer that the
    /// species cannot leave, such as the particles of an intercalation
    /// electrode. At low frequency Z -> R/3 + R/(j w tau): a resistance R/3
    /// in series with the capacitance tau/R (see
    /// [`Element::capacitance_f`]); the DRT is the set of lines of
    /// [`Element::lines`], which add up to R/3.
    WarburgReflective {
        /// Diffusion resistance R (ohm); the DRT holds R/3 of it.
        r_ohm: f64,
        /// Diffusion time constant L^2/D (s).
        tau_s: f64,
    },
}

impl Element {
    /// Impedance at angular frequency `omega_rad_s`.
    pub fn impedance(&self, omega_rad_s: f64) -> Complex64 {
        let jw = Complex64::new(0.0, omega_rad_s);
        match *self {
            Element::Resistor { r_ohm } => Complex64::new(r_ohm, 0.0),
            Element::Inductor { l_h } => jw * l_h,
            Element::Capacitor { c_f } => 1.0 / (jw * c_f),
            Element::Voigt { r_ohm, tau_s } => r_ohm / (1.0 + jw * tau_s),
            Element::Zarc { r_ohm, tau_s, phi } => r_ohm / (1.0 + (jw * tau_s).powf(phi)),
            Element::HavriliakNegami {
                r_ohm,
                tau_s,
                alpha,
                beta,
            } => r_ohm / (1.0 + (jw * tau_s).powf(alpha)).powf(beta),
            Element::WarburgFinite { r_ohm, tau_s } => {
                let s = (jw * tau_s).sqrt();
                if s.norm() < 1e-6 {
                    // tanh(s)/s = 1 - s^2/3 + ...
                    r_ohm * (1.0 - s * s / 3.0)
                } else if s.re > 20.0 {
                    // tanh(s) = 1 to double precision; avoids overflow in tanh.
                    r_ohm / s
                } else {
                    r_ohm * s.tanh() / s
                }
            }
            Element::WarburgReflective { r_ohm, tau_s } => {
                let s = (jw * tau_s).sqrt();
                if s.norm() < 1e-4 {
                    // coth(s)/s = 1/s^2 + 1/3 - s^2/45 + ... (Laurent series of coth).
                    r_ohm * (1.0 / (s * s) + 1.0 / 3.0 - s * s / 45.0)
                } else if s.re > 20.0 {
                    // coth(s) = 1 to double precision; avoids overflow in tanh.
                    r_ohm / s
                } else {
                    r_ohm / (s * s.tanh())
                }
            }
        }
    }

    /// The capacitance in series with the element's DRT at low frequency
    /// (farad): `C` for a capacitor, `tau/R` for the reflective Warburg
    /// element (from the 1/s term of coth(sqrt s)/sqrt s = 1/s + ..., i.e.
    /// Z -> R/(j w tau); Jacobsen & West 1995); `None` for the others.
    pub fn capacitance_f(&self) -> Option<f64> {
        match *self {
            Element::Capacitor { c_f } => Some(c_f),
            Element::WarburgReflective { r_ohm, tau_s } => Some(tau_s / r_ohm),
            _ => None,
        }
    }

    /// Continuous part of the DRT, gamma(ln tau) in ohm, where the element
    /// has one (ZARC, Havriliak-Negami); `None` for elements whose DRT is a
    /// set of lines or that have none.
    ///
    /// ZARC (Fuoss & Kirkwood 1941):
    /// gamma(ln tau) = R/(2 pi) sin((1-phi) pi) / (cosh(phi ln(tau/tau0)) - cos((1-phi) pi)).
    ///
    /// Havriliak-Negami (Havriliak & Negami 1967, distribution function), with
    /// x = tau/tau0:
    /// gamma = R/pi (x^{alpha beta} sin(beta theta)) / (x^{2 alpha} + 2 x^alpha cos(pi alpha) + 1)^{beta/2},
    /// theta = atan(sin(pi alpha) / (x^alpha + cos(pi alpha))), taken in [0, pi].
    pub fn gamma_ohm(&self, tau_s: f64) -> Option<f64> {
        match *self {
            Element::Zarc {
                r_ohm,
                tau_s: t0,
                phi,
            } => {
                let a = (1.0 - phi) * PI;
                Some(r_ohm / (2.0 * PI) * a.sin() / ((phi * (tau_s / t0).ln()).cosh() - a.cos()))
            }
            Element::HavriliakNegami {
                r_ohm,
                tau_s: t0,
                alpha,
                beta,
            } => {
                let xa = (tau_s / t0).powf(alpha);
                let theta = (PI * alpha).sin().atan2(xa + (PI * alpha).cos());
                let den = (xa * xa + 2.0 * xa * (PI * alpha).cos() + 1.0).powf(beta / 2.0);
                Some(r_ohm / PI * (tau_s / t0).powf(alpha * beta) * (beta * theta).sin() / den)
            }
            _ => None,
        }
    }

    /// Discrete DRT lines `(tau_s, r_ohm)`, slowest first: one for a Voigt
    /// element; for the Warburg elements the first `n` terms of the
    /// partial-fraction series of tanh and coth (Abramowitz & Stegun 1964,
    /// section 4.5), with s = j w tau:
    ///
    /// - transmissive, tanh(sqrt s)/sqrt s = sum_{k>=1} 2/((k - 1/2)^2 pi^2 + s):
    ///   lines at tau/a_k with weights 2R/a_k, a_k = (k - 1/2)^2 pi^2; they
    ///   add up to R, and the second, third and fourth are 1/9, 1/25 and 1/49
    ///   of the first (about 11 %, 4 % and 2 %);
    /// - reflective, coth(sqrt s)/sqrt s = 1/s + sum_{k>=1} 2/(k^2 pi^2 + s):
    ///   the capacitive term 1/s (see [`Element::capacitance_f`]) and lines
    ///   at tau/b_k with weights 2R/b_k, b_k = k^2 pi^2, adding up to
    ///   2R/pi^2 * pi^2/6 = R/3; the k-th line is 1/k^2 of the first.
    ///
    /// The series converge like 1/n: the lines left out hold about
    /// 2R/(pi^2 n) together.
    pub fn lines(&self, n: usize) -> Vec<(f64, f64)> {
        let series = |r_ohm: f64, tau_s: f64, offset: f64| {
            (1..=n)
                .map(|k| {
                    let a = ((k as f64 - offset) * PI).powi(2);
                    (tau_s / a, 2.0 * r_ohm / a)
                })
                .collect()
        };
        match *self {
            Element::Voigt { r_ohm, tau_s } => vec![(tau_s, r_ohm)],
            Element::WarburgFinite { r_ohm, tau_s } => series(r_ohm, tau_s, 0.5),
            Element::WarburgReflective { r_ohm, tau_s } => series(r_ohm, tau_s, 0.0),
            _ => Vec::new(),
        }
    }

    /// The element's contribution to the polarisation resistance (the
    /// integral of its DRT: the real part of its impedance at w -> 0 minus
    /// at w -> inf), for elements with a DRT; R/3 for the reflective
    /// Warburg element, whose capacitive branch is not part of it.
    pub fn r_pol_ohm(&self) -> f64 {
        match *self {
            Element::Voigt { r_ohm, .. }
            | Element::Zarc { r_ohm, .. }
            | Element::HavriliakNegami { r_ohm, .. }
            | Element::WarburgFinite { r_ohm, .. } => r_ohm,
            Element::WarburgReflective { r_ohm, .. } => r_ohm / 3.0,
            _ => 0.0,
        }
    }
}

impl Element {
    /// The part of the element's voltage per ampere that has not yet relaxed
    /// at `t_s > 0` after a current step (equally: the part still to decay
    /// after a long current is interrupted),
    /// `integral gamma(ln tau) exp(-t/tau) d ln tau`, in ohm.
    ///
    /// Voigt: `R exp(-t/tau)`. Finite Warburg: the sum over its lines
    /// `2R/a_k exp(-a_k t/tau)`, `a_k = ((k - 1/2) pi)^2` (the lines of
    /// [`Element::lines`]; `a_k = (k pi)^2` for the reflective one, whose
    /// capacitive branch never relaxes). ZARC and Havriliak-Negami: their distributions
    /// integrated numerically (composite 8-point Gauss-Legendre, 0.05 ln
    /// units per panel, over +-40/phi ln units around tau0, where the
    /// Fuoss-Kirkwood tails are below 1e-13 R). Zero for R, L and C.
    pub fn unrelaxed_ohm(&self, t_s: f64) -> f64 {
        match *self {
            Element::Voigt { r_ohm, tau_s } => r_ohm * (-t_s / tau_s).exp(),
            Element::WarburgFinite { r_ohm, tau_s } => warburg_lines_decay(r_ohm, tau_s, 0.5, t_s),
            Element::WarburgReflective { r_ohm, tau_s } => {
                warburg_lines_decay(r_ohm, tau_s, 0.0, t_s)
            }
            Element::Zarc { tau_s, phi, .. } => self.integrate_gamma(t_s, tau_s, 40.0 / phi),
            Element::HavriliakNegami {
                tau_s, alpha, beta, ..
            } => self.integrate_gamma(t_s, tau_s, 40.0 / (alpha * beta.min(1.0))),
            _ => 0.0,
        }
    }

    fn integrate_gamma(&self, t_s: f64, tau0_s: f64, half_width: f64) -> f64 {
        let gl = crate::kernel::quadrature::gauss_legendre(8);
        let h = 0.05;
        let y0 = tau0_s.ln() - half_width;
        let panels = (2.0 * half_width / h).ceil() as usize;
        let mut sum = 0.0;
        for p in 0..panels {
            let a = y0 + p as f64 * h;
            for &(x, w) in &gl {
                let y = a + h * (x + 1.0) / 2.0;
                let tau = y.exp();
                let decay = (-t_s / tau).exp();
                if decay > 0.0 {
                    sum += w * h / 2.0 * self.gamma_ohm(tau).unwrap_or(0.0) * decay;
                }
            }
        }
        sum
    }
}

/// `sum_k 2R/a_k exp(-a_k t/tau)` over the Warburg lines
/// `a_k = ((k - offset) pi)^2` (offset 1/2: transmissive, 0: reflective),
/// summed until a term falls below 1e-17 R.
fn warburg_lines_decay(r_ohm: f64, tau_s: f64, offset: f64, t_s: f64) -> f64 {
    let mut sum = 0.0;
    for k in 1..1_000_000 {
        let a = ((k as f64 - offset) * PI).powi(2);
        let term = 2.0 * r_ohm / a * (-a * t_s / tau_s).exp();
        sum += term;
        if term < 1e-17 * r_ohm {
            break;
        }
    }
    sum
}

/// Elements in series.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Series(pub Vec<Element>);

impl Series {
    /// Total impedance at `frequency_hz`.
    pub fn impedance(&self, frequency_hz: f64) -> Complex64 {
        let w = 2.0 * PI * frequency_hz;
        self.0.iter().map(|e| e.impedance(w)).sum()
    }

    /// Sum of the continuous DRTs of the elements at `tau_s`.
    pub fn gamma_ohm(&self, tau_s: f64) -> f64 {
        self.0.iter().filter_map(|e| e.gamma_ohm(tau_s)).sum()
    }

    /// Total polarisation resistance (the integral of the DRT; see
    /// [`Element::r_pol_ohm`]).
    pub fn r_pol_ohm(&self) -> f64 {
        self.0.iter().map(Element::r_pol_ohm).sum()
    }

    /// The DRT lines of all elements ([`Element::lines`] with `n` terms per
    /// Warburg element), ascending in tau.
    pub fn lines(&self, n: usize) -> Vec<(f64, f64)> {
        let mut all: Vec<(f64, f64)> = self.0.iter().flat_map(|e| e.lines(n)).collect();
        all.sort_by(|a, b| a.0.total_cmp(&b.0));
        all
    }

    /// The capacitance in series with the whole DRT (farad): the series
    /// combination 1/C = sum 1/C_i of [`Element::capacitance_f`]; `None`
    /// when no element has one.
    pub fn capacitance_f(&self) -> Option<f64> {
        let elastance: Vec<f64> = self
            .0
            .iter()
            .filter_map(|e| e.capacitance_f().map(|c| 1.0 / c))
            .collect();
        (!elastance.is_empty()).then(|| 1.0 / elastance.iter().sum::<f64>())
    }

    /// Voltage per ampere at `t_s > 0` after a current step from rest at
    /// t = 0 (in ohm): the series resistances, plus each element's relaxed
    /// part `r_pol - unrelaxed(t)`, plus `t/C` for series capacitors and
    /// for the capacitive branch of a reflective Warburg element
    /// (superposition of the elements' step responses in series; textbook
    /// network relation). Inductors contribute only at t = 0.
    pub fn current_step_ohm(&self, t_s: f64) -> f64 {
        self.0
            .iter()
            .map(|e| match *e {
                Element::Resistor { r_ohm } => r_ohm,
                Element::Capacitor { c_f } => t_s / c_f,
                Element::Inductor { .. } => 0.0,
                _ => {
                    e.r_pol_ohm() - e.unrelaxed_ohm(t_s)
                        + e.capacitance_f().map_or(0.0, |c| t_s / c)
                }
            })
            .sum()
    }

    /// Voltage above its final value, per ampere, at `t_s > 0` after a long
    /// constant current is interrupted at t = 0 (in ohm): the sum of
    /// [`Element::unrelaxed_ohm`].
    pub fn relaxation_ohm(&self, t_s: f64) -> f64 {
        self.0.iter().map(|e| e.unrelaxed_ohm(t_s)).sum()
    }

    /// Impedance at each frequency as `(z_re_ohm, z_im_ohm)` vectors.
    pub fn sample(&self, frequency_hz: &[f64]) -> (Vec<f64>, Vec<f64>) {
        frequency_hz
            .iter()
            .map(|&f| {
                let z = self.impedance(f);
                (z.re, z.im)
            })
            .unzip()
    }
}

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
