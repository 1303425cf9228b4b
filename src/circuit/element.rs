//! Two-terminal elements with closed-form impedances and distributions of
//! relaxation times, and their series composition: the building blocks of
//! equivalent circuits ([`crate::circuit`]) and of the synthetic spectra of
//! [`crate::synth`].
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
//! - H. Gerischer (1951), Z. Phys. Chem. 198, 286-313 (the impedance of a
//!   reaction coupled to diffusion, R/sqrt(1 + j w tau)); B. A. Boukamp,
//!   H. J. M. Bouwmeester (2003), Solid State Ionics 157, 29-33 (its
//!   distribution of relaxation times; from memory).

use num_complex::Complex64;
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
    /// Gerischer element, Z = R / sqrt(1 + j w tau) (Gerischer 1951): a
    /// reaction in series with diffusion into a semi-infinite medium, as in
    /// a porous mixed-conducting electrode. Its DRT lives below tau only
    /// (see [`Element::gamma_ohm`]); at high frequency the phase tends to
    /// -45 degrees, at low frequency Z -> R.
    Gerischer {
        /// Low-frequency resistance (ohm).
        r_ohm: f64,
        /// Characteristic time constant (s).
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
            Element::Gerischer { r_ohm, tau_s } => r_ohm / (1.0 + jw * tau_s).sqrt(),
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
    ///
    /// Gerischer (Boukamp & Bouwmeester 2003; also from the Stieltjes
    /// inversion gamma(ln tau) = Im Z(s = -1/tau - j0)/pi of
    /// R/sqrt(1 + s tau0)): gamma = (R/pi) / sqrt(tau0/tau - 1) for
    /// tau < tau0 and zero above; it integrates to R, with an integrable
    /// singularity at tau0.
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
            Element::Gerischer { r_ohm, tau_s: t0 } => Some(if tau_s < t0 {
                r_ohm / PI / (t0 / tau_s - 1.0).sqrt()
            } else {
                0.0
            }),
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
            | Element::WarburgFinite { r_ohm, .. }
            | Element::Gerischer { r_ohm, .. } => r_ohm,
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
            Element::Gerischer { r_ohm, tau_s } => gerischer_decay(r_ohm, tau_s, t_s),
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

/// `integral gamma exp(-t/tau') d ln tau'` of the Gerischer element:
/// with tau' = tau0 sin^2(theta) the 1/sqrt singularity at tau0 goes away,
/// `(2R/pi) integral_0^{pi/2} exp(-t/(tau0 sin^2 theta)) d theta`, summed by
/// composite 8-point Gauss-Legendre on 64 panels (the integrand is smooth).
fn gerischer_decay(r_ohm: f64, tau0_s: f64, t_s: f64) -> f64 {
    let gl = crate::kernel::quadrature::gauss_legendre(8);
    let panels = 64;
    let h = PI / 2.0 / panels as f64;
    let mut sum = 0.0;
    for p in 0..panels {
        let a = p as f64 * h;
        for &(x, w) in &gl {
            let th = a + h * (x + 1.0) / 2.0;
            let s = th.sin();
            if s > 0.0 {
                sum += w * h / 2.0 * (-t_s / (tau0_s * s * s)).exp();
            }
        }
    }
    2.0 * r_ohm / PI * sum
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

