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
    /// units per panel for phi near 1, over +-40/phi ln units around tau0,
    /// where the Fuoss-Kirkwood tails are below 1e-13 R; wider panels and
    /// a range cut at +-745 ln units for small exponents, see
    /// `integrate_gamma`). Zero for R, L and C.
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

    /// `half_width` is 40/phi: the distribution varies on a scale of 1/phi
    /// ln units, so the panels widen with it (0.05/phi, at most 0.5, which
    /// still follows the cut-off exp(-t/tau), one ln unit wide); the range
    /// stops at +-745 ln units (beyond, tau over- or underflows) and starts
    /// where exp(-t/tau) is still above the smallest double. The cost per
    /// time stays bounded for any exponent.
    fn integrate_gamma(&self, t_s: f64, tau0_s: f64, half_width: f64) -> f64 {
        let gl = crate::kernel::quadrature::gauss_legendre(8);
        let h = (half_width / 800.0).clamp(0.05, 0.5);
        let half_width = half_width.min(745.0);
        let y_end = tau0_s.ln() + half_width;
        // exp(-t/tau) underflows for tau < t/745.
        let y0 = (tau0_s.ln() - half_width).max(t_s.ln() - 745f64.ln());
        if y0.is_nan() || y0 >= y_end {
            return 0.0;
        }
        let panels = ((y_end - y0) / h).ceil() as usize;
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
/// `(2R/pi) integral_0^{pi/2} exp(-t/(tau0 sin^2 theta)) d theta`, which is
/// Craig's form of the complementary error function (J. W. Craig (1991),
/// Proc. IEEE MILCOM, 571-575): `R erfc(sqrt(t/tau0))`.
fn gerischer_decay(r_ohm: f64, tau0_s: f64, t_s: f64) -> f64 {
    r_ohm * libm::erfc((t_s / tau0_s).sqrt())
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

/// The kind of an element, without its values: the keyword of the model
/// text format ([`crate::circuit::text`]) and the order and meaning of its
/// parameters ([`Kind::params`], [`Element::params`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Kind {
    /// [`Element::Resistor`].
    Resistor,
    /// [`Element::Inductor`].
    Inductor,
    /// [`Element::Capacitor`].
    Capacitor,
    /// [`Element::Voigt`].
    Voigt,
    /// [`Element::Zarc`].
    Zarc,
    /// [`Element::HavriliakNegami`].
    HavriliakNegami,
    /// [`Element::WarburgFinite`] (transmissive boundary).
    WarburgTransmissive,
    /// [`Element::WarburgReflective`].
    WarburgReflective,
    /// [`Element::Gerischer`].
    Gerischer,
}

/// The physical quantity of a parameter (its SI unit).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Quantity {
    /// Resistance, ohm.
    Resistance,
    /// Inductance, henry.
    Inductance,
    /// Capacitance, farad.
    Capacitance,
    /// Time, second.
    Time,
    /// A dimensionless exponent in (0, 1].
    Exponent,
}

impl Quantity {
    /// The SI unit symbol as the model text writes it (`""` for exponents).
    pub fn unit(self) -> &'static str {
        match self {
            Quantity::Resistance => "ohm",
            Quantity::Inductance => "H",
            Quantity::Capacitance => "F",
            Quantity::Time => "s",
            Quantity::Exponent => "",
        }
    }
}

/// One parameter of an element kind.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ParamSpec {
    /// Name in the model text and in summaries (`r`, `tau`, `phi`, ...).
    pub name: &'static str,
    /// What it measures; values are positive, exponents in (0, 1].
    pub quantity: Quantity,
}

const R: ParamSpec = ParamSpec {
    name: "r",
    quantity: Quantity::Resistance,
};
const TAU: ParamSpec = ParamSpec {
    name: "tau",
    quantity: Quantity::Time,
};
const fn exponent(name: &'static str) -> ParamSpec {
    ParamSpec {
        name,
        quantity: Quantity::Exponent,
    }
}

impl Kind {
    /// Every kind, in the order of the model text documentation.
    pub const ALL: [Kind; 9] = [
        Kind::Resistor,
        Kind::Inductor,
        Kind::Capacitor,
        Kind::Voigt,
        Kind::Zarc,
        Kind::HavriliakNegami,
        Kind::WarburgTransmissive,
        Kind::WarburgReflective,
        Kind::Gerischer,
    ];

    /// The keyword of the model text format.
    pub fn name(self) -> &'static str {
        match self {
            Kind::Resistor => "resistor",
            Kind::Inductor => "inductor",
            Kind::Capacitor => "capacitor",
            Kind::Voigt => "voigt",
            Kind::Zarc => "zarc",
            Kind::HavriliakNegami => "havriliak-negami",
            Kind::WarburgTransmissive => "warburg-transmissive",
            Kind::WarburgReflective => "warburg-reflective",
            Kind::Gerischer => "gerischer",
        }
    }

    /// The kind of a keyword.
    pub fn from_name(name: &str) -> Option<Kind> {
        Kind::ALL.into_iter().find(|k| k.name() == name)
    }

    /// The parameters, in the order of [`Element::params`].
    pub fn params(self) -> &'static [ParamSpec] {
        const L: ParamSpec = ParamSpec {
            name: "l",
            quantity: Quantity::Inductance,
        };
        const C: ParamSpec = ParamSpec {
            name: "c",
            quantity: Quantity::Capacitance,
        };
        const PHI: ParamSpec = exponent("phi");
        const ALPHA: ParamSpec = exponent("alpha");
        const BETA: ParamSpec = exponent("beta");
        match self {
            Kind::Resistor => &[R],
            Kind::Inductor => &[L],
            Kind::Capacitor => &[C],
            Kind::Voigt | Kind::WarburgTransmissive | Kind::WarburgReflective | Kind::Gerischer => {
                &[R, TAU]
            }
            Kind::Zarc => &[R, TAU, PHI],
            Kind::HavriliakNegami => &[R, TAU, ALPHA, BETA],
        }
    }

    /// Whether the element relaxes (has a time constant and a DRT): a
    /// process in the sense of the process count; false for R, L and C.
    pub fn is_process(self) -> bool {
        !matches!(self, Kind::Resistor | Kind::Inductor | Kind::Capacitor)
    }

    /// The element of this kind with parameter values `p` (in the order of
    /// [`Kind::params`]; `p.len()` must match).
    pub fn element(self, p: &[f64]) -> Element {
        assert_eq!(
            p.len(),
            self.params().len(),
            "{} takes {} parameters",
            self.name(),
            self.params().len()
        );
        match self {
            Kind::Resistor => Element::Resistor { r_ohm: p[0] },
            Kind::Inductor => Element::Inductor { l_h: p[0] },
            Kind::Capacitor => Element::Capacitor { c_f: p[0] },
            Kind::Voigt => Element::Voigt {
                r_ohm: p[0],
                tau_s: p[1],
            },
            Kind::Zarc => Element::Zarc {
                r_ohm: p[0],
                tau_s: p[1],
                phi: p[2],
            },
            Kind::HavriliakNegami => Element::HavriliakNegami {
                r_ohm: p[0],
                tau_s: p[1],
                alpha: p[2],
                beta: p[3],
            },
            Kind::WarburgTransmissive => Element::WarburgFinite {
                r_ohm: p[0],
                tau_s: p[1],
            },
            Kind::WarburgReflective => Element::WarburgReflective {
                r_ohm: p[0],
                tau_s: p[1],
            },
            Kind::Gerischer => Element::Gerischer {
                r_ohm: p[0],
                tau_s: p[1],
            },
        }
    }
}

impl Element {
    /// The element's kind.
    pub fn kind(&self) -> Kind {
        match self {
            Element::Resistor { .. } => Kind::Resistor,
            Element::Inductor { .. } => Kind::Inductor,
            Element::Capacitor { .. } => Kind::Capacitor,
            Element::Voigt { .. } => Kind::Voigt,
            Element::Zarc { .. } => Kind::Zarc,
            Element::HavriliakNegami { .. } => Kind::HavriliakNegami,
            Element::WarburgFinite { .. } => Kind::WarburgTransmissive,
            Element::WarburgReflective { .. } => Kind::WarburgReflective,
            Element::Gerischer { .. } => Kind::Gerischer,
        }
    }

    /// The parameter values, in the order of [`Kind::params`].
    pub fn params(&self) -> Vec<f64> {
        match *self {
            Element::Resistor { r_ohm } => vec![r_ohm],
            Element::Inductor { l_h } => vec![l_h],
            Element::Capacitor { c_f } => vec![c_f],
            Element::Voigt { r_ohm, tau_s }
            | Element::WarburgFinite { r_ohm, tau_s }
            | Element::WarburgReflective { r_ohm, tau_s }
            | Element::Gerischer { r_ohm, tau_s } => vec![r_ohm, tau_s],
            Element::Zarc { r_ohm, tau_s, phi } => vec![r_ohm, tau_s, phi],
            Element::HavriliakNegami {
                r_ohm,
                tau_s,
                alpha,
                beta,
            } => vec![r_ohm, tau_s, alpha, beta],
        }
    }
}

#[cfg(test)]
mod kind_tests {
    use super::*;

    #[test]
    fn params_round_trip_through_kind() {
        let all = [
            Element::Resistor { r_ohm: 1.0 },
            Element::Inductor { l_h: 2e-9 },
            Element::Capacitor { c_f: 3e-3 },
            Element::Voigt {
                r_ohm: 1.0,
                tau_s: 2.0,
            },
            Element::Zarc {
                r_ohm: 1.0,
                tau_s: 2.0,
                phi: 0.7,
            },
            Element::HavriliakNegami {
                r_ohm: 1.0,
                tau_s: 2.0,
                alpha: 0.7,
                beta: 0.6,
            },
            Element::WarburgFinite {
                r_ohm: 1.0,
                tau_s: 2.0,
            },
            Element::WarburgReflective {
                r_ohm: 1.0,
                tau_s: 2.0,
            },
            Element::Gerischer {
                r_ohm: 1.0,
                tau_s: 2.0,
            },
        ];
        for (e, k) in all.iter().zip(Kind::ALL) {
            assert_eq!(e.kind(), k);
            assert_eq!(k.element(&e.params()), *e);
            assert_eq!(Kind::from_name(k.name()), Some(k));
        }
    }
}

impl Element {
    /// Derivatives of the impedance at `omega_rad_s` with respect to each
    /// parameter, in the order of [`Element::params`] (for the Jacobian of a
    /// circuit fit). Differentiated by hand from the impedances above, with
    /// x = (j w tau)^phi (ZARC), x = (j w tau)^alpha (HN) and s = sqrt(j w
    /// tau) (Warburg elements; ds/dtau = s / (2 tau)):
    ///
    /// - Voigt: dZ/dR = 1/(1 + j w tau), dZ/dtau = -R j w / (1 + j w tau)^2;
    /// - ZARC: dZ/dR = 1/(1 + x), dZ/dtau = -R phi x / (tau (1 + x)^2),
    ///   dZ/dphi = -R x ln(j w tau) / (1 + x)^2;
    /// - HN: dZ/dR = (1 + x)^-beta, dZ/dtau = -R beta alpha x (1 + x)^(-beta-1) / tau,
    ///   dZ/dalpha = -R beta x ln(j w tau) (1 + x)^(-beta-1), dZ/dbeta = -Z ln(1 + x);
    /// - transmissive Warburg: dZ/ds = R (sech^2 s / s - tanh s / s^2);
    /// - reflective Warburg: dZ/ds = -R (csch^2 s / s + coth s / s^2);
    /// - Gerischer: dZ/dR = Z/R, dZ/dtau = -R j w / (2 (1 + j w tau)^(3/2)).
    pub fn gradient(&self, omega_rad_s: f64) -> Vec<Complex64> {
        let jw = Complex64::new(0.0, omega_rad_s);
        let one = Complex64::new(1.0, 0.0);
        match *self {
            Element::Resistor { .. } => vec![one],
            Element::Inductor { .. } => vec![jw],
            Element::Capacitor { c_f } => vec![-1.0 / (jw * c_f * c_f)],
            Element::Voigt { r_ohm, tau_s } => {
                let d = 1.0 + jw * tau_s;
                vec![1.0 / d, -r_ohm * jw / (d * d)]
            }
            Element::Zarc { r_ohm, tau_s, phi } => {
                let l = (jw * tau_s).ln();
                let x = (phi * l).exp();
                let d = 1.0 + x;
                let d2 = d * d;
                vec![
                    1.0 / d,
                    -r_ohm * phi * x / (tau_s * d2),
                    -r_ohm * x * l / d2,
                ]
            }
            Element::HavriliakNegami {
                r_ohm,
                tau_s,
                alpha,
                beta,
            } => {
                let l = (jw * tau_s).ln();
                let x = (alpha * l).exp();
                let d = 1.0 + x;
                let z1 = d.powf(-beta);
                let z2 = z1 / d;
                vec![
                    z1,
                    -r_ohm * beta * alpha * x * z2 / tau_s,
                    -r_ohm * beta * x * l * z2,
                    -r_ohm * z1 * d.ln(),
                ]
            }
            Element::WarburgFinite { r_ohm, tau_s }
            | Element::WarburgReflective { r_ohm, tau_s } => {
                let s = (jw * tau_s).sqrt();
                let z = self.impedance(omega_rad_s);
                let dz_ds = if s.norm() < 1e-4 {
                    // Series of tanh(s)/s and coth(s)/s near 0.
                    if matches!(self, Element::WarburgFinite { .. }) {
                        r_ohm * (-2.0 * s / 3.0)
                    } else {
                        r_ohm * (-2.0 / (s * s * s) - 2.0 * s / 45.0)
                    }
                } else if s.re > 20.0 {
                    -z / s
                } else {
                    let t = s.tanh();
                    if matches!(self, Element::WarburgFinite { .. }) {
                        r_ohm * ((1.0 - t * t) / s - t / (s * s))
                    } else {
                        let c = 1.0 / t;
                        r_ohm * (-(c * c - 1.0) / s - c / (s * s))
                    }
                };
                vec![z / r_ohm, dz_ds * s / (2.0 * tau_s)]
            }
            Element::Gerischer { r_ohm, tau_s } => {
                let d = 1.0 + jw * tau_s;
                let sq = d.sqrt();
                vec![1.0 / sq, -r_ohm * jw / (2.0 * d * sq)]
            }
        }
    }
}

#[cfg(test)]
mod gradient_tests {
    use super::*;

    /// Every analytical derivative against a central difference of the
    /// impedance (relative step 1e-6), at w tau from 2e-4 to 2e5 (the small-argument series of the
    /// Warburg elements, below w tau = 1e-8, are not reached).
    #[test]
    fn gradient_matches_central_differences() {
        let all = [
            Element::Resistor { r_ohm: 1.5 },
            Element::Inductor { l_h: 2e-7 },
            Element::Capacitor { c_f: 3e-3 },
            Element::Voigt {
                r_ohm: 1.5,
                tau_s: 2e-3,
            },
            Element::Zarc {
                r_ohm: 1.5,
                tau_s: 2e-3,
                phi: 0.7,
            },
            Element::HavriliakNegami {
                r_ohm: 1.5,
                tau_s: 2e-3,
                alpha: 0.7,
                beta: 0.6,
            },
            Element::WarburgFinite {
                r_ohm: 1.5,
                tau_s: 2e-3,
            },
            Element::WarburgReflective {
                r_ohm: 1.5,
                tau_s: 2e-3,
            },
            Element::Gerischer {
                r_ohm: 1.5,
                tau_s: 2e-3,
            },
        ];
        for e in all {
            let p = e.params();
            for w in [1e-1, 1e1, 5e2, 1e4, 1e6, 1e8] {
                let g = e.gradient(w);
                for k in 0..p.len() {
                    let h = 1e-6 * p[k];
                    let mut a = p.clone();
                    let mut b = p.clone();
                    a[k] += h;
                    b[k] -= h;
                    let fd = (e.kind().element(&a).impedance(w)
                        - e.kind().element(&b).impedance(w))
                        / (2.0 * h);
                    let scale = e.impedance(w).norm() / p[k];
                    assert!(
                        (g[k] - fd).norm() <= 1e-6 * scale.max(fd.norm()),
                        "{:?} w {w} param {k}: {} vs {}",
                        e.kind(),
                        g[k],
                        fd
                    );
                }
            }
        }
    }
}
