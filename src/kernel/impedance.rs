//! Real and imaginary kernel blocks of the DRT model of an impedance spectrum.
//!
//! For one basis function phi_j the model contributes
//!
//! $$ K^{re}_{ij} = \int \frac{\phi_j(y)}{1 + \omega_i^2 e^{2y}}\,dy, \qquad
//!    K^{im}_{ij} = -\int \frac{\omega_i e^{y}\,\phi_j(y)}{1 + \omega_i^2 e^{2y}}\,dy $$
//!
//! with y = ln tau; these are the real and imaginary parts of
//! `integral phi_j(ln tau) / (1 + j omega tau) d ln tau` (the Voigt element
//! R/(1 + j w tau) has Re = R/(1 + w^2 tau^2), Im = -R w tau/(1 + w^2 tau^2)).
//!
//! Because the grid is uniform and the basis functions are translates, each
//! entry depends only on `x = ln(omega_i tau_j)`:
//! `K_ij = sum_k w_k g(x + u_k)` with one set of quadrature offsets.

use super::Basis;
use crate::linalg::Matrix;
use nalgebra::DMatrix;

/// Kernel blocks for a set of angular frequencies.
#[derive(Clone, Debug)]
pub struct ImpedanceKernel {
    /// Real part, `m x n` (frequencies x basis functions), in ohm per unit coefficient.
    pub(crate) re: DMatrix<f64>,
    /// Imaginary part, `m x n`, carrying its physical (negative) sign.
    pub(crate) im: DMatrix<f64>,
}

impl ImpedanceKernel {
    /// Real part, `m x n` (frequencies x basis functions), in ohm per unit
    /// coefficient.
    pub fn re(&self) -> Matrix {
        Matrix(self.re.clone())
    }

    /// Imaginary part, `m x n`, carrying its physical (negative) sign.
    pub fn im(&self) -> Matrix {
        Matrix(self.im.clone())
    }

    /// Builds both blocks by quadrature (see [`Basis::quadrature_offsets`]).
    pub fn new(basis: &Basis, omega_rad_s: &[f64]) -> Self {
        let m = omega_rad_s.len();
        let n = basis.len();
        let offsets = basis.quadrature_offsets();
        // e^{u_k} once; then a = omega tau_j e^{u_k} needs one multiply per node.
        let exp_u: Vec<(f64, f64)> = offsets.iter().map(|&(u, w)| (u.exp(), w)).collect();
        let mut re = DMatrix::zeros(m, n);
        let mut im = DMatrix::zeros(m, n);
        for (j, &yj) in basis.centers().iter().enumerate() {
            let tau = yj.exp();
            for (i, &w) in omega_rad_s.iter().enumerate() {
                let wt = w * tau;
                let (mut sr, mut si) = (0.0, 0.0);
                for &(eu, wk) in &exp_u {
                    let a = wt * eu;
                    let d = 1.0 / (1.0 + a * a);
                    sr += wk * d;
                    si += wk * a * d;
                }
                re[(i, j)] = sr;
                im[(i, j)] = -si;
            }
        }
        Self { re, im }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::grid::TauGrid;
    use crate::kernel::BasisKind;
    use crate::kernel::quadrature::gauss_legendre;

    fn omegas() -> Vec<f64> {
        (0..25)
            .map(|i| 2.0 * std::f64::consts::PI * 10f64.powf(-1.0 + 0.25 * i as f64))
            .collect()
    }

    /// Independent reference: composite 20-point Gauss-Legendre over 400 panels.
    fn reference(basis: &Basis, j: usize, w: f64) -> (f64, f64) {
        let c = basis.centers()[j];
        let half = basis.half_support();
        let gl = gauss_legendre(20);
        let panels = 400;
        let h = 2.0 * half / panels as f64;
        let (mut sr, mut si) = (0.0, 0.0);
        for p in 0..panels {
            let a0 = c - half + p as f64 * h;
            for &(t, wt) in &gl {
                let y = a0 + h * (t + 1.0) / 2.0;
                let phi = basis.shape(y - c);
                let x = w * y.exp();
                sr += wt * h / 2.0 * phi / (1.0 + x * x);
                si -= wt * h / 2.0 * phi * x / (1.0 + x * x);
            }
        }
        (sr, si)
    }

    #[test]
    fn kernel_matches_independent_quadrature() {
        let grid = TauGrid::new(1e-5, 1e1, 10.0).unwrap();
        for kind in [BasisKind::Gaussian, BasisKind::Hat] {
            let basis = Basis::new(kind, &grid);
            let w = omegas();
            let k = ImpedanceKernel::new(&basis, &w);
            for j in [0, 17, 40, basis.len() - 1] {
                for (i, &wi) in w.iter().enumerate() {
                    let (r, s) = reference(&basis, j, wi);
                    let scale = basis.integral();
                    assert!(
                        (k.re[(i, j)] - r).abs() < 1e-11 * scale,
                        "{kind} re ({i},{j})"
                    );
                    assert!(
                        (k.im[(i, j)] - s).abs() < 1e-11 * scale,
                        "{kind} im ({i},{j})"
                    );
                }
            }
        }
    }

    /// Voigt element closed form: a very narrow basis function of unit area is
    /// a Dirac line, so its column tends to Re = 1/(1 + w^2 tau^2),
    /// Im = -w tau/(1 + w^2 tau^2) (textbook RC network relation).
    #[test]
    fn narrow_basis_function_tends_to_voigt_element() {
        let grid = TauGrid::new(1e-3 / 10f64.powf(0.5), 1e-3 * 10f64.powf(0.5), 200.0).unwrap();
        let basis = Basis::new(BasisKind::Gaussian, &grid);
        let w = omegas();
        let k = ImpedanceKernel::new(&basis, &w);
        let j = basis.len() / 2;
        let tau = basis.centers()[j].exp();
        assert!((tau / 1e-3 - 1.0).abs() < 1e-9);
        for (i, &wi) in w.iter().enumerate() {
            let x = wi * tau;
            let re = 1.0 / (1.0 + x * x);
            let im = -x / (1.0 + x * x);
            // Width 1.5 steps of 0.0115 ln units: second-moment error ~ 1e-4.
            assert!(
                (k.re[(i, j)] / basis.integral() - re).abs() < 2e-4,
                "re at {i}"
            );
            assert!(
                (k.im[(i, j)] / basis.integral() - im).abs() < 2e-4,
                "im at {i}"
            );
        }
    }

    /// A sum of hat functions is 1 between the first and last centre (and tapers
    /// linearly outside), so summing columns gives closed forms:
    /// integral dy/(1 + w^2 e^{2y}) = y - ln(1 + w^2 e^{2y})/2 and
    /// integral w e^y/(1 + w^2 e^{2y}) dy = arctan(w e^y) (standard integrals).
    #[test]
    fn hat_partition_of_unity_gives_closed_form() {
        let grid = TauGrid::new(1e-5, 1e1, 10.0).unwrap();
        let basis = Basis::new(BasisKind::Hat, &grid);
        let w = omegas();
        let k = ImpedanceKernel::new(&basis, &w);
        let (y0, y1, h) = (
            basis.centers()[0],
            basis.centers()[basis.len() - 1],
            basis.step(),
        );
        for (i, &wi) in w.iter().enumerate() {
            let prim_re = |y: f64| y - (1.0 + (wi * y.exp()).powi(2)).ln() / 2.0;
            let prim_im = |y: f64| (wi * y.exp()).atan();
            let sum_re: f64 = k.re.row(i).iter().sum();
            let sum_im: f64 = k.im.row(i).iter().sum();
            // The tapers outside [y0, y1] are integrated by a fine trapezoid.
            let taper = |a: f64, b: f64, up: bool, f: &dyn Fn(f64) -> f64| -> f64 {
                let n = 4000;
                let d = (b - a) / n as f64;
                (0..n)
                    .map(|s| {
                        let y = a + (s as f64 + 0.5) * d;
                        let wgt = if up { (y - a) / h } else { (b - y) / h };
                        wgt * f(y) * d
                    })
                    .sum()
            };
            let g_re = |y: f64| 1.0 / (1.0 + (wi * y.exp()).powi(2));
            let g_im = |y: f64| -(wi * y.exp()) / (1.0 + (wi * y.exp()).powi(2));
            let want_re = prim_re(y1) - prim_re(y0)
                + taper(y0 - h, y0, true, &g_re)
                + taper(y1, y1 + h, false, &g_re);
            let want_im = -(prim_im(y1) - prim_im(y0))
                + taper(y0 - h, y0, true, &g_im)
                + taper(y1, y1 + h, false, &g_im);
            assert!(
                (sum_re - want_re).abs() < 1e-7,
                "re row {i}: {sum_re} vs {want_re}"
            );
            assert!(
                (sum_im - want_im).abs() < 1e-7,
                "im row {i}: {sum_im} vs {want_im}"
            );
        }
    }
}
