//! Complex non-linear least squares (CNLS) fit of an equivalent circuit to
//! an impedance spectrum.
//!
//! The real and imaginary parts are fitted together (J. R. Macdonald,
//! J. A. Garber (1977), J. Electrochem. Soc. 124, 1022-1030), each residual
//! weighted by the modulus of the measured point (modulus weighting, common
//! practice for relative errors):
//!
//! $$ \chi^2 = \sum_i \frac{(Z'_i - \hat Z'_i)^2 + (Z''_i - \hat Z''_i)^2}{|Z_i|^2}. $$
//!
//! Positive parameters are fitted as `u = ln p`, exponents in (0, 1) as
//! `u = ln(p / (1 - p))`, so every value stays in its range without
//! constraints. The minimiser is the Levenberg-Marquardt method
//! (K. Levenberg 1944; D. W. Marquardt 1963, J. SIAM 11, 431-441) of the
//! `levenberg-marquardt` crate; the Jacobian is analytical
//! ([`Element::gradient`], by the chain rule through the transforms).
//!
//! Standard errors come from the Jacobian at the minimum,
//! `cov(u) = s^2 (J^T J)^{-1}` with `s^2 = chi^2 / (n - p)` (`n` residuals,
//! `p` free parameters; the usual asymptotic covariance of non-linear least
//! squares: G. A. F. Seber, C. J. Wild (1989), *Nonlinear Regression*,
//! Wiley, section 2.1), carried to the parameters by the delta method
//! (`se(p) = |dp/du| se(u)`). The correlation matrix is the same in `u` and
//! in `p` (a monotone change of each variable alone).
//!
//! Information criteria with the noise variance profiled out (K. P.
//! Burnham, D. R. Anderson (2002), *Model Selection and Multimodel
//! Inference*, 2nd ed., Springer, section 2.2; G. Schwarz (1978), Ann.
//! Statist. 6, 461-464): `AIC = n ln(chi^2/n) + 2p`,
//! `BIC = n ln(chi^2/n) + p ln n`.

use super::element::{Element, Quantity};
use crate::{Error, Result};
use levenberg_marquardt::{LeastSquaresProblem, LevenbergMarquardt, TerminationReason};
use nalgebra::storage::Owned;
use nalgebra::{DMatrix, DVector, Dyn};
use num_complex::Complex64;
use std::f64::consts::PI;

/// A measured spectrum to fit (frequencies need not be sorted).
#[derive(Clone, Debug)]
pub struct FitData {
    /// Angular frequencies (rad/s).
    omega_rad_s: Vec<f64>,
    /// Measured impedance (ohm).
    z_ohm: Vec<Complex64>,
    /// Residual weight of each point, 1/|Z_i|.
    weight: Vec<f64>,
}

impl FitData {
    /// Data from frequencies (Hz) and the measured real and imaginary parts
    /// (ohm). Points with |Z| = 0 are refused (their weight is infinite).
    pub fn new(frequency_hz: &[f64], z_re_ohm: &[f64], z_im_ohm: &[f64]) -> Result<Self> {
        let n = frequency_hz.len();
        if z_re_ohm.len() != n || z_im_ohm.len() != n {
            return Err(Error::Data(format!(
                "fit data: {n} frequencies but {} real and {} imaginary parts",
                z_re_ohm.len(),
                z_im_ohm.len()
            )));
        }
        let mut d = FitData {
            omega_rad_s: Vec::with_capacity(n),
            z_ohm: Vec::with_capacity(n),
            weight: Vec::with_capacity(n),
        };
        for i in 0..n {
            let z = Complex64::new(z_re_ohm[i], z_im_ohm[i]);
            let m = z.norm();
            if !(m > 0.0 && m.is_finite() && frequency_hz[i] > 0.0 && frequency_hz[i].is_finite()) {
                return Err(Error::Data(format!(
                    "fit data: point {} (f = {} Hz, Z = {} {:+}j ohm) cannot be weighted by its modulus",
                    i + 1,
                    frequency_hz[i],
                    z.re,
                    z.im
                )));
            }
            d.omega_rad_s.push(2.0 * PI * frequency_hz[i]);
            d.z_ohm.push(z);
            d.weight.push(1.0 / m);
        }
        Ok(d)
    }

    /// Number of frequencies.
    pub fn len(&self) -> usize {
        self.z_ohm.len()
    }

    /// Whether there are no points.
    pub fn is_empty(&self) -> bool {
        self.z_ohm.is_empty()
    }

    /// Number of real residuals (twice the frequencies).
    pub fn residual_count(&self) -> usize {
        2 * self.len()
    }
}

/// One fitted parameter.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ParamEstimate {
    /// Name (`r`, `tau`, `phi`, ... as in [`super::element::Kind::params`]).
    pub name: &'static str,
    /// SI unit (`ohm`, `s`, `H`, `F`; empty for exponents).
    pub unit: &'static str,
    /// Fitted value.
    pub value: f64,
    /// Standard error; `None` for a fixed parameter or one the data do not
    /// determine (a singular J^T J).
    pub se: Option<f64>,
    /// Held fixed in the fit.
    pub fixed: bool,
}

/// One fitted element.
#[derive(Clone, Debug, PartialEq)]
pub struct ElementFit {
    /// The element with the fitted values.
    pub element: Element,
    /// Its parameters, in the order of [`super::element::Kind::params`].
    pub params: Vec<ParamEstimate>,
}

/// The result of a CNLS fit.
#[derive(Clone, Debug)]
pub struct CircuitFit {
    /// The fitted elements, in series, in the order given.
    pub elements: Vec<ElementFit>,
    /// Weighted sum of squared residuals (chi-square with modulus weights).
    pub chi2: f64,
    /// Number of real residuals `n` (two per frequency).
    pub residuals: usize,
    /// Number of free parameters `p`.
    pub free_params: usize,
    /// Relative noise level the residuals imply, sqrt(chi^2 / (n - p)).
    pub noise_rel: f64,
    /// Akaike information criterion.
    pub aic: f64,
    /// Bayesian (Schwarz) information criterion.
    pub bic: f64,
    /// Names of the free parameters (`element.param`, element numbered
    /// from 1), the rows and columns of `correlation`.
    pub free_names: Vec<String>,
    /// Correlation matrix of the free parameters (row major); NaN where a
    /// standard error is undefined.
    pub correlation: Vec<Vec<f64>>,
    /// The minimiser stopped on a convergence test (not on its evaluation
    /// limit or a numerical failure).
    pub converged: bool,
    /// Why the minimiser stopped.
    pub termination: String,
    /// Residual evaluations used (the Jacobian's excluded).
    pub evaluations: usize,
    /// Problems with the fit (not converged, parameters not determined,
    /// strongly correlated parameters).
    pub warnings: Vec<String>,
}

impl CircuitFit {
    /// The fitted elements alone.
    pub fn circuit(&self) -> Vec<Element> {
        self.elements.iter().map(|e| e.element).collect()
    }

    /// The fitted impedance at `frequency_hz`.
    pub fn impedance(&self, frequency_hz: f64) -> Complex64 {
        let w = 2.0 * PI * frequency_hz;
        self.elements.iter().map(|e| e.element.impedance(w)).sum()
    }

    /// Number of relaxing elements (processes).
    pub fn processes(&self) -> usize {
        self.elements
            .iter()
            .filter(|e| e.element.kind().is_process())
            .count()
    }
}

/// Options of the minimiser.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FitOptions {
    /// Relative reduction of chi^2 below which the minimiser stops (ftol).
    pub ftol: f64,
    /// Relative step in the parameters below which it stops (xtol).
    pub xtol: f64,
    /// Evaluation budget, in units of (free parameters + 1).
    pub patience: usize,
    /// |correlation| above which a pair of parameters is reported as
    /// hard to separate.
    pub correlation_warn: f64,
}

impl Default for FitOptions {
    /// ftol 1e-12, xtol 1e-10, patience 50, correlation warning at 0.98.
    fn default() -> Self {
        Self {
            ftol: 1e-12,
            xtol: 1e-10,
            patience: 50,
            correlation_warn: 0.98,
        }
    }
}

/// How one free parameter maps to the minimiser's variable.
#[derive(Clone, Copy, Debug)]
enum Transform {
    /// p = exp(u).
    Log,
    /// p = 1/(1 + exp(-u)).
    Logit,
}

impl Transform {
    fn to_u(self, p: f64) -> f64 {
        match self {
            Transform::Log => p.ln(),
            Transform::Logit => {
                let p = p.clamp(1e-6, 1.0 - 1e-4);
                (p / (1.0 - p)).ln()
            }
        }
    }

    fn to_p(self, u: f64) -> f64 {
        match self {
            Transform::Log => u.exp(),
            Transform::Logit => 1.0 / (1.0 + (-u).exp()),
        }
    }

    /// dp/du at `p`.
    fn slope(self, p: f64) -> f64 {
        match self {
            Transform::Log => p,
            Transform::Logit => p * (1.0 - p),
        }
    }
}

/// The least-squares problem handed to the minimiser.
struct Problem<'a> {
    data: &'a FitData,
    /// Parameter values of every element (fixed and free).
    values: Vec<Vec<f64>>,
    kinds: Vec<super::element::Kind>,
    /// (element, parameter, transform) of each free variable.
    free: Vec<(usize, usize, Transform)>,
    u: DVector<f64>,
}

impl Problem<'_> {
    fn elements_at(&self, u: &DVector<f64>) -> Vec<Element> {
        let mut values = self.values.clone();
        for (k, &(e, p, t)) in self.free.iter().enumerate() {
            values[e][p] = t.to_p(u[k]);
        }
        self.kinds
            .iter()
            .zip(&values)
            .map(|(k, v)| k.element(v))
            .collect()
    }

    /// Weighted residuals at `u` for the minimiser: those of
    /// [`Problem::exact_residuals_at`], or, where the circuit's impedance is
    /// not finite (a trial step to an extreme value), a residual of
    /// [`NOT_FINITE_RESIDUAL`] per entry, so that the minimiser rejects the
    /// step and shortens it instead of stopping.
    fn residuals_at(&self, u: &DVector<f64>) -> Option<DVector<f64>> {
        Some(
            self.exact_residuals_at(u)
                .unwrap_or_else(|| DVector::from_element(2 * self.data.len(), NOT_FINITE_RESIDUAL)),
        )
    }

    /// Weighted residuals at `u`: Re then Im of (model - data)/|data| per
    /// point, interleaved; `None` where the impedance is not finite.
    fn exact_residuals_at(&self, u: &DVector<f64>) -> Option<DVector<f64>> {
        let elements = self.elements_at(u);
        let n = self.data.len();
        let mut r = DVector::zeros(2 * n);
        for i in 0..n {
            let w = self.data.omega_rad_s[i];
            let z: Complex64 = elements.iter().map(|e| e.impedance(w)).sum();
            let d = (z - self.data.z_ohm[i]) * self.data.weight[i];
            if !(d.re.is_finite() && d.im.is_finite()) {
                return None;
            }
            r[2 * i] = d.re;
            r[2 * i + 1] = d.im;
        }
        Some(r)
    }

    /// Jacobian of the residuals in `u`: `w_i dZ/dp dp/du` from the
    /// elements' analytical derivatives ([`Element::gradient`]).
    fn jacobian_at(&self, u: &DVector<f64>) -> Option<DMatrix<f64>> {
        let elements = self.elements_at(u);
        let n = self.data.len();
        let mut j = DMatrix::zeros(2 * n, u.len());
        for i in 0..n {
            let w = self.data.omega_rad_s[i];
            let wt = self.data.weight[i];
            let grads: Vec<Vec<Complex64>> = elements.iter().map(|e| e.gradient(w)).collect();
            for (k, &(e, p, t)) in self.free.iter().enumerate() {
                let d = grads[e][p] * (wt * t.slope(t.to_p(u[k])));
                if !(d.re.is_finite() && d.im.is_finite()) {
                    return None;
                }
                j[(2 * i, k)] = d.re;
                j[(2 * i + 1, k)] = d.im;
            }
        }
        Some(j)
    }
}

/// The residual of a trial point where the circuit's impedance is not
/// finite: large, so the point is rejected, and finite, so its square sums
/// without overflow.
const NOT_FINITE_RESIDUAL: f64 = 1e100;

impl LeastSquaresProblem<f64, Dyn, Dyn> for Problem<'_> {
    type ResidualStorage = Owned<f64, Dyn>;
    type JacobianStorage = Owned<f64, Dyn, Dyn>;
    type ParameterStorage = Owned<f64, Dyn>;

    fn set_params(&mut self, u: &DVector<f64>) {
        self.u.copy_from(u);
    }

    fn params(&self) -> DVector<f64> {
        self.u.clone()
    }

    fn residuals(&self) -> Option<DVector<f64>> {
        self.residuals_at(&self.u)
    }

    fn jacobian(&self) -> Option<DMatrix<f64>> {
        self.jacobian_at(&self.u)
    }
}

/// Fits `start` (elements in series; their values are the starting point)
/// to `data`. `fixed[e][p]` holds parameter `p` of element `e` at its
/// starting value (an empty `fixed` frees everything).
pub fn fit_circuit(
    data: &FitData,
    start: &[Element],
    fixed: &[Vec<bool>],
    opts: &FitOptions,
) -> Result<CircuitFit> {
    if start.is_empty() {
        return Err(Error::Config(
            "a circuit to fit needs at least one element".into(),
        ));
    }
    let kinds: Vec<_> = start.iter().map(Element::kind).collect();
    let values: Vec<Vec<f64>> = start.iter().map(Element::params).collect();
    let mut free = Vec::new();
    for (e, kind) in kinds.iter().enumerate() {
        for (p, spec) in kind.params().iter().enumerate() {
            let v = values[e][p];
            if !(v.is_finite() && v > 0.0) {
                return Err(Error::Config(format!(
                    "element {} ({}): parameter `{}` must start at a positive finite value, got {v}",
                    e + 1,
                    kind.name(),
                    spec.name
                )));
            }
            let is_fixed = fixed
                .get(e)
                .and_then(|f| f.get(p))
                .copied()
                .unwrap_or(false);
            if !is_fixed {
                let t = match spec.quantity {
                    Quantity::Exponent => Transform::Logit,
                    _ => Transform::Log,
                };
                free.push((e, p, t));
            }
        }
    }
    let n = data.residual_count();
    if free.len() >= n {
        return Err(Error::Data(format!(
            "{} free parameters but only {} residuals ({} frequencies): the fit is not determined",
            free.len(),
            n,
            data.len()
        )));
    }
    let u0 = DVector::from_iterator(
        free.len(),
        free.iter().map(|&(e, p, t)| t.to_u(values[e][p])),
    );
    let problem = Problem {
        data,
        values,
        kinds,
        free,
        u: u0,
    };
    let lm = LevenbergMarquardt::new()
        .with_ftol(opts.ftol)
        .with_xtol(opts.xtol)
        .with_gtol(0.0)
        .with_patience(opts.patience.max(1));
    let (problem, report) = if problem.free.is_empty() {
        (
            problem,
            levenberg_marquardt::MinimizationReport {
                termination: TerminationReason::NoParameters,
                number_of_evaluations: 1,
                objective_function: 0.0,
            },
        )
    } else {
        lm.minimize(problem)
    };
    summarise(
        &problem,
        &report.termination,
        report.number_of_evaluations,
        opts,
    )
}

/// The fit's statistics, standard errors and correlations at the minimiser's
/// last point.
fn summarise(
    problem: &Problem<'_>,
    termination: &TerminationReason,
    evaluations: usize,
    opts: &FitOptions,
) -> Result<CircuitFit> {
    let u = &problem.u;
    let r = problem.exact_residuals_at(u).ok_or_else(|| {
        Error::Data("the circuit's impedance is not finite at the fitted values".into())
    })?;
    let n = r.len();
    let p = problem.free.len();
    let chi2 = r.norm_squared();
    let dof = (n - p) as f64;
    let s2 = chi2 / dof;
    let mut warnings = Vec::new();
    let converged = matches!(
        termination,
        TerminationReason::Converged { .. }
            | TerminationReason::Orthogonal
            | TerminationReason::ResidualsZero
            | TerminationReason::NoParameters
    );
    if !converged {
        warnings.push(format!(
            "the minimiser stopped before converging ({termination:?})"
        ));
    }
    // Covariance of u.
    let mut cov: Option<DMatrix<f64>> = None;
    if p > 0 {
        if let Some(j) = problem.jacobian_at(u) {
            let jtj = j.transpose() * &j;
            // Scale to unit diagonal before inverting (the condition of the
            // correlation matrix, not of the raw units, decides).
            let d: Vec<f64> = (0..p).map(|k| jtj[(k, k)].sqrt()).collect();
            if d.iter().all(|&x| x > 0.0 && x.is_finite()) {
                let scaled = DMatrix::from_fn(p, p, |a, b| jtj[(a, b)] / (d[a] * d[b]));
                if let Some(ch) = scaled.clone().cholesky() {
                    let inv = ch.inverse();
                    let rcond = {
                        let e = scaled.symmetric_eigenvalues();
                        e.min() / e.max()
                    };
                    if rcond > 1e-14 {
                        cov = Some(DMatrix::from_fn(p, p, |a, b| {
                            s2 * inv[(a, b)] / (d[a] * d[b])
                        }));
                    }
                }
            }
        }
        if cov.is_none() {
            warnings.push(
                "the data do not determine every parameter (J^T J singular): no standard errors"
                    .to_string(),
            );
        }
    }
    let elements_now = problem.elements_at(u);
    let mut elements: Vec<ElementFit> = elements_now
        .iter()
        .map(|e| ElementFit {
            element: *e,
            params: e
                .kind()
                .params()
                .iter()
                .zip(e.params())
                .map(|(spec, value)| ParamEstimate {
                    name: spec.name,
                    unit: spec.quantity.unit(),
                    value,
                    se: None,
                    fixed: true,
                })
                .collect(),
        })
        .collect();
    let mut free_names = Vec::with_capacity(p);
    let mut bound_notes = Vec::new();
    for (k, &(e, q, t)) in problem.free.iter().enumerate() {
        let est = &mut elements[e].params[q];
        est.fixed = false;
        let at_bound = matches!(t, Transform::Logit) && t.slope(est.value) < 1e-6;
        est.se = if at_bound {
            None
        } else {
            cov.as_ref().map(|c| t.slope(est.value) * c[(k, k)].sqrt())
        };
        if at_bound {
            bound_notes.push(format!(
                "parameter {}.{} = {} is at the edge of (0, 1]: no standard error (a symmetric error means nothing there; a simpler element may describe the data)",
                e + 1,
                est.name,
                est.value
            ));
        }
        free_names.push(format!("{}.{}", e + 1, est.name));
    }
    warnings.extend(bound_notes);
    let correlation: Vec<Vec<f64>> = (0..p)
        .map(|a| {
            (0..p)
                .map(|b| match &cov {
                    Some(c) => c[(a, b)] / (c[(a, a)] * c[(b, b)]).sqrt(),
                    None => f64::NAN,
                })
                .collect()
        })
        .collect();
    for a in 0..p {
        for b in 0..a {
            if correlation[a][b].abs() > opts.correlation_warn {
                warnings.push(format!(
                    "parameters {} and {} are correlated at {:+.3}: the data hardly separate them",
                    free_names[b], free_names[a], correlation[a][b]
                ));
            }
        }
    }
    let nf = n as f64;
    // A perfect fit (noise-free data) would give ln 0; floor chi^2 at the
    // rounding level of double precision.
    let ll = nf * (chi2.max(nf * 1e-30) / nf).ln();
    Ok(CircuitFit {
        elements,
        chi2,
        residuals: n,
        free_params: p,
        noise_rel: s2.sqrt(),
        aic: ll + 2.0 * p as f64,
        bic: ll + p as f64 * nf.ln(),
        free_names,
        correlation,
        converged,
        termination: format!("{termination:?}"),
        evaluations,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::{Series, add_noise, log_frequencies};

    fn data(cell: &Series, noise: f64, seed: u64) -> FitData {
        let f = log_frequencies(1e-2, 1e5, 10.0);
        let (mut re, mut im) = cell.sample(&f);
        if noise > 0.0 {
            add_noise(&mut re, &mut im, noise, seed);
        }
        FitData::new(&f, &re, &im).unwrap()
    }

    #[test]
    fn recovers_a_zarc_from_a_poor_start() {
        let truth = Series(vec![
            Element::Resistor { r_ohm: 10.0 },
            Element::Zarc {
                r_ohm: 50.0,
                tau_s: 1e-3,
                phi: 0.8,
            },
        ]);
        let d = data(&truth, 0.0, 0);
        let start = [
            Element::Resistor { r_ohm: 5.0 },
            Element::Zarc {
                r_ohm: 80.0,
                tau_s: 3e-3,
                phi: 0.6,
            },
        ];
        let fit = fit_circuit(&d, &start, &[], &FitOptions::default()).unwrap();
        assert!(fit.converged, "{}", fit.termination);
        let got = fit.elements[1].element.params();
        assert!((got[0] / 50.0 - 1.0).abs() < 1e-6, "{got:?}");
        assert!((got[1] / 1e-3 - 1.0).abs() < 1e-6, "{got:?}");
        assert!((got[2] / 0.8 - 1.0).abs() < 1e-6, "{got:?}");
        assert!((fit.elements[0].element.params()[0] - 10.0).abs() < 1e-5);
    }

    #[test]
    fn fixed_parameters_stay_and_have_no_error() {
        let truth = Series(vec![
            Element::Resistor { r_ohm: 10.0 },
            Element::Voigt {
                r_ohm: 20.0,
                tau_s: 1e-2,
            },
        ]);
        let d = data(&truth, 0.001, 3);
        let start = [
            Element::Resistor { r_ohm: 10.5 },
            Element::Voigt {
                r_ohm: 25.0,
                tau_s: 1e-2,
            },
        ];
        let fit = fit_circuit(
            &d,
            &start,
            &[vec![true], vec![false, false]],
            &FitOptions::default(),
        )
        .unwrap();
        assert_eq!(fit.elements[0].params[0].value, 10.5);
        assert_eq!(fit.elements[0].params[0].se, None);
        assert_eq!(fit.free_params, 2);
        assert!(fit.elements[1].params[0].se.unwrap() > 0.0);
        // R_inf held 0.5 ohm too high: the fit is worse than the noise.
        assert!(fit.noise_rel > 0.005, "{}", fit.noise_rel);
    }

    #[test]
    fn information_criteria_follow_their_definitions() {
        let truth = Series(vec![
            Element::Resistor { r_ohm: 1.0 },
            Element::Voigt {
                r_ohm: 2.0,
                tau_s: 1e-3,
            },
        ]);
        let d = data(&truth, 0.002, 9);
        let fit = fit_circuit(&d, &truth.0, &[], &FitOptions::default()).unwrap();
        let n = fit.residuals as f64;
        assert_eq!(fit.residuals, 2 * 71);
        let ll = n * (fit.chi2 / n).ln();
        assert!((fit.aic - (ll + 6.0)).abs() < 1e-9);
        assert!((fit.bic - (ll + 3.0 * n.ln())).abs() < 1e-9);
        // The implied noise is the one added (2 per mille on each part).
        assert!(
            (fit.noise_rel / 0.002 - 1.0).abs() < 0.15,
            "{}",
            fit.noise_rel
        );
        // Correlation matrix: unit diagonal, symmetric.
        for a in 0..3 {
            assert!((fit.correlation[a][a] - 1.0).abs() < 1e-12);
            for b in 0..3 {
                assert!((fit.correlation[a][b] - fit.correlation[b][a]).abs() < 1e-12);
            }
        }
    }

    #[test]
    fn refuses_more_parameters_than_residuals() {
        let d = FitData::new(&[1.0], &[1.0], &[-1.0]).unwrap();
        let start = [
            Element::Voigt {
                r_ohm: 1.0,
                tau_s: 1.0,
            },
            Element::Resistor { r_ohm: 1.0 },
        ];
        let e = fit_circuit(&d, &start, &[], &FitOptions::default()).unwrap_err();
        assert!(
            e.to_string()
                .contains("3 free parameters but only 2 residuals"),
            "{e}"
        );
        let e = FitData::new(&[1.0], &[0.0], &[0.0]).unwrap_err();
        assert!(
            e.to_string().contains("cannot be weighted by its modulus"),
            "{e}"
        );
    }
}
