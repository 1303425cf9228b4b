//! The lambda rules against closed-form ridge references.
//!
//! With `M = I` and every variable free (the non-negativity bounds inactive
//! along the whole path), the constrained solution at each `lambda` is the
//! ridge solution, and everything a rule reads is a sum over the singular
//! triplets `(s_i, u_i, v_i)` of `A`, with `beta_i = u_i' b` and the filter
//! factors `f_i = s_i^2 / (s_i^2 + lambda)` (Hansen 1998, section 5.1):
//!
//! - `||r||^2 = sum (1 - f_i)^2 beta_i^2 + ||b_perp||^2`,
//! - `||x||^2 = sum f_i^2 beta_i^2 / s_i^2`,
//! - `tr H    = sum f_i`.
//!
//! The references below are computed from nalgebra's SVD of `A` and never
//! call the crate's solver, so they are independent of the normal-equation
//! solves and of the influence-trace code under test. Every path is first
//! checked to keep all variables free, so that the comparison is a fair one.
//!
//! Choices made on a grid are compared at four placements of the grid
//! (shifted by quarter steps), so that no tolerance depends on the optimum
//! happening to sit on or between grid points.
//!
//! # References
//! - G. H. Golub, M. Heath, G. Wahba (1979), "Generalized cross-validation as
//!   a method for choosing a good ridge parameter", Technometrics 21(2),
//!   215-223, eq. (1.4).
//! - P. C. Hansen, D. P. O'Leary (1993), "The use of the L-curve in the
//!   regularization of discrete ill-posed problems", SIAM J. Sci. Comput.
//!   14(6), 1487-1503, section 3.
//! - V. A. Morozov (1966), "On the solution of functional equations by the
//!   method of regularization", Soviet Math. Dokl. 7, 414-417.
//! - P. C. Hansen (1998), *Rank-Deficient and Discrete Ill-Posed Problems*,
//!   SIAM: section 5.1 (filter factors), chapter 7 (parameter-choice
//!   methods), section 7.5 (L-curve).

use super::{LambdaPath, discrepancy, gcv, lcurve};
use crate::solve::{SolveStatus, Tikhonov};
use nalgebra::{DMatrix, DVector};

// ---------------------------------------------------------------------------
// Deterministic test data
// ---------------------------------------------------------------------------

/// SplitMix64 (Steele, Lea, Flood 2014): a fixed-seed generator, so every
/// run sees the same "noise".
struct SplitMix64(u64);

impl SplitMix64 {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform on (0, 1).
    fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// Standard normal (Box-Muller).
    fn normal(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
    }
}

/// `k` values per decade from `10^lo` to `10^hi` inclusive.
fn log_grid(lo: f64, hi: f64, per_decade: usize) -> Vec<f64> {
    let k = ((hi - lo) * per_decade as f64).round() as usize;
    (0..=k)
        .map(|i| 10f64.powf(lo + i as f64 / per_decade as f64))
        .collect()
}

/// A discrete ill-posed test problem with a known SVD structure:
/// `A = U diag(s) V'`, `U` (m x n) orthonormal from the QR factorisation of a
/// pseudo-random matrix, `V` the orthonormal DCT-II basis (its first vector is
/// constant, the later ones oscillate more and more, as the singular vectors
/// of a smoothing kernel do), `s_k = 10^(-0.4 k)`. `x_true` is smooth and
/// at least 2 everywhere; `b = A x_true + sigma e` with `e` standard normal.
struct Problem {
    a: DMatrix<f64>,
    b: DVector<f64>,
    sigma: f64,
}

fn smooth_problem(m: usize, n: usize, sigma: f64, seed: u64) -> Problem {
    let mut rng = SplitMix64(seed);
    let g = DMatrix::from_fn(m, n, |_, _| rng.normal());
    let u = g.qr().q();
    let v = DMatrix::from_fn(n, n, |j, k| {
        let c = if k == 0 {
            (1.0 / n as f64).sqrt()
        } else {
            (2.0 / n as f64).sqrt()
        };
        c * (std::f64::consts::PI * k as f64 * (j as f64 + 0.5) / n as f64).cos()
    });
    let s = DVector::from_fn(n, |k, _| 10f64.powf(-0.4 * k as f64));
    let a = &u * DMatrix::from_diagonal(&s) * v.transpose();
    let x_true = DVector::from_fn(n, |j, _| {
        let t = (j as f64 + 0.5) / n as f64;
        2.0 + (-((t - 0.4) / 0.25).powi(2)).exp()
    });
    let b = &a * &x_true + DVector::from_fn(m, |_, _| sigma * rng.normal());
    Problem { a, b, sigma }
}

// ---------------------------------------------------------------------------
// SVD reference (independent of the crate's solver)
// ---------------------------------------------------------------------------

/// Ridge quantities from the SVD of `A` (Hansen 1998, section 5.1).
struct SvdRidge {
    m: usize,
    /// Singular values.
    s: Vec<f64>,
    /// `beta_i^2 = (u_i' b)^2`.
    beta2: Vec<f64>,
    /// `||b - U U' b||^2`, formed from the vector (not as `||b||^2 - sum beta^2`,
    /// which would cancel catastrophically when the residual floor is small).
    perp2: f64,
}

impl SvdRidge {
    fn new(a: &DMatrix<f64>, b: &DVector<f64>) -> Self {
        let svd = a.clone().svd(true, false);
        let u = svd.u.expect("left singular vectors");
        let beta = u.tr_mul(b);
        let perp = b - &u * &beta;
        Self {
            m: a.nrows(),
            s: svd.singular_values.iter().copied().collect(),
            beta2: beta.iter().map(|v| v * v).collect(),
            perp2: perp.norm_squared(),
        }
    }

    /// `||r(lambda)||^2 = sum (lambda/(s^2+lambda))^2 beta^2 + ||b_perp||^2`.
    fn residual_sq(&self, lam: f64) -> f64 {
        self.s
            .iter()
            .zip(&self.beta2)
            .map(|(s, b2)| (lam / (s * s + lam)).powi(2) * b2)
            .sum::<f64>()
            + self.perp2
    }

    /// `||x(lambda)||^2 = sum s^2 beta^2 / (s^2+lambda)^2`.
    fn solution_sq(&self, lam: f64) -> f64 {
        self.s
            .iter()
            .zip(&self.beta2)
            .map(|(s, b2)| s * s * b2 / (s * s + lam).powi(2))
            .sum()
    }

    /// `tr H = sum s^2/(s^2+lambda)`.
    fn trace(&self, lam: f64) -> f64 {
        self.s.iter().map(|s| s * s / (s * s + lam)).sum()
    }

    /// Golub-Heath-Wahba (1979, eq. 1.4):
    /// `V = (1/m)||(I-H)b||^2 / [(1/m) tr(I-H)]^2`.
    fn gcv(&self, lam: f64) -> f64 {
        let m = self.m as f64;
        (self.residual_sq(lam) / m) / ((m - self.trace(lam)) / m).powi(2)
    }

    /// Derivatives with respect to `lambda`:
    /// `(R, R', R'', E, E', E'')` with `R = ||r||^2`, `E = ||x||^2`;
    /// `R' = sum 2 lambda s^2 beta^2/(s^2+lambda)^3`,
    /// `R'' = sum 2 s^2 beta^2 (s^2 - 2 lambda)/(s^2+lambda)^4`,
    /// `E' = -sum 2 s^2 beta^2/(s^2+lambda)^3`,
    /// `E'' = sum 6 s^2 beta^2/(s^2+lambda)^4`.
    fn derivatives(&self, lam: f64) -> [f64; 6] {
        let (mut r1, mut r2, mut e1, mut e2) = (0.0, 0.0, 0.0, 0.0);
        for (s, b2) in self.s.iter().zip(&self.beta2) {
            let (s2, d) = (s * s, s * s + lam);
            r1 += 2.0 * lam * s2 * b2 / d.powi(3);
            r2 += 2.0 * s2 * b2 * (s2 - 2.0 * lam) / d.powi(4);
            e1 -= 2.0 * s2 * b2 / d.powi(3);
            e2 += 6.0 * s2 * b2 / d.powi(4);
        }
        [self.residual_sq(lam), r1, r2, self.solution_sq(lam), e1, e2]
    }

    /// Signed curvature of `(log ||r||, log ||x||)` traversed with increasing
    /// `lambda`, from first and second derivatives in `t = ln lambda`
    /// (`d/dt = lambda d/dlambda`; curvature does not depend on the
    /// parametrisation, only on its direction).
    fn curvature(&self, lam: f64) -> f64 {
        let [r, r1, r2, e, e1, e2] = self.derivatives(lam);
        // rho = (1/2) ln R: rho_t = lam R'/(2R),
        // rho_tt = (lam R'/R + lam^2 R''/R - (lam R'/R)^2)/2; same for eta.
        let p = |v: f64, v1: f64, v2: f64| {
            let g = lam * v1 / v;
            (0.5 * g, 0.5 * (g + lam * lam * v2 / v - g * g))
        };
        let (rt, rtt) = p(r, r1, r2);
        let (et, ett) = p(e, e1, e2);
        (rt * ett - rtt * et) / (rt * rt + et * et).powf(1.5)
    }

    /// The same curvature in the second-derivative-free form: since
    /// `R' = -lambda E'`, the second derivatives cancel and
    /// `kappa = 2 R E (R E + lambda E' R + lambda^2 E' E) / (|E'| (lambda^2 E^2 + R^2)^{3/2})`
    /// (derived as in Hansen 1998, section 7.5; the factor 2 because the
    /// axes are logs of norms, not of squared norms).
    fn curvature_first_order(&self, lam: f64) -> f64 {
        let [r, _, _, e, e1, _] = self.derivatives(lam);
        2.0 * r * e * (r * e + lam * e1 * r + lam * lam * e1 * e)
            / (e1.abs() * (lam * lam * e * e + r * r).powf(1.5))
    }
}

/// Golden-section search for a minimum of `f` over `log10 lambda` in
/// `[lo, hi]` (a bracket taken from a fine grid); returns `log10 lambda`.
fn golden_min(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64) -> f64 {
    let g = (5f64.sqrt() - 1.0) / 2.0;
    let (mut c, mut d) = (hi - g * (hi - lo), lo + g * (hi - lo));
    let (mut fc, mut fd) = (f(c), f(d));
    while hi - lo > 1e-10 {
        if fc < fd {
            hi = d;
            (d, fd) = (c, fc);
            c = hi - g * (hi - lo);
            fc = f(c);
        } else {
            lo = c;
            (c, fc) = (d, fd);
            d = lo + g * (hi - lo);
            fd = f(d);
        }
    }
    0.5 * (lo + hi)
}

/// Minimiser of `f(log10 lambda)` on `[lo, hi]`: dense scan at 200 points
/// per decade, then golden section inside the two neighbouring cells.
fn global_min(f: impl Fn(f64) -> f64, lo: f64, hi: f64) -> f64 {
    let k = ((hi - lo) * 200.0).round() as usize;
    let t = |i: usize| lo + (hi - lo) * i as f64 / k as f64;
    let i = (0..=k)
        .min_by(|&i, &j| f(t(i)).total_cmp(&f(t(j))))
        .unwrap();
    assert!(
        i > 0 && i < k,
        "reference extremum at the end of its scan range"
    );
    golden_min(&f, t(i - 1), t(i + 1))
}

/// Solves along `lambdas` and checks that no bound is active anywhere, so
/// that the constrained path is the ridge path the references describe.
fn trace_unconstrained(p: &Tikhonov, lambdas: &[f64], n: usize) -> LambdaPath {
    let path = LambdaPath::trace(p, lambdas, &[]);
    for pt in &path.points {
        assert_eq!(pt.solution.info.status, SolveStatus::Converged);
        assert_eq!(
            pt.solution.free.len(),
            n,
            "bound active at lambda {}",
            pt.solution.lambda
        );
        let xmin = pt.solution.x.iter().copied().fold(f64::INFINITY, f64::min);
        assert!(xmin > 1e-3, "x_min {xmin} at lambda {}", pt.solution.lambda);
    }
    path
}

// ---------------------------------------------------------------------------
// Tests
// ---------------------------------------------------------------------------

/// Rows, columns, noise level and seed of the shared test problem. Its
/// singular values run from 1 to 2.5e-4; the first four SVD components carry
/// signal well above `sigma = 1e-3`, the last six are noise-dominated, so
/// every rule has an interior choice (GCV near 10^-4.24, the discrepancy
/// root near 10^-3.65, the L-curve corner near 10^-6.14).
const ROWS: usize = 40;
const COLS: usize = 10;
const SIGMA: f64 = 1e-3;
const SEED: u64 = 7;

/// The range of every path, in `log10 lambda`: beyond `s_min^2 = 10^-7.2`
/// at the bottom and beyond `s_max^2 = 1` at the top.
const LO: f64 = -9.0;
const HI: f64 = 2.0;

/// Grid placements: shifts by 0, 1/4, 1/2 and 3/4 of a grid step.
const PHASES: [f64; 4] = [0.0, 0.25, 0.5, 0.75];

fn setup() -> (Problem, SvdRidge, Tikhonov) {
    let pr = smooth_problem(ROWS, COLS, SIGMA, SEED);
    let reference = SvdRidge::new(&pr.a, &pr.b);
    let t = Tikhonov::from_dense(pr.a.clone(), pr.b.clone(), DMatrix::identity(COLS, COLS));
    (pr, reference, t)
}

/// `per_decade` points per decade over `[LO, HI]`, shifted by `phase` steps.
fn grid(per_decade: usize, phase: f64) -> Vec<f64> {
    let shift = phase / per_decade as f64;
    log_grid(LO + shift, HI + shift, per_decade)
}

/// Index of the grid point nearest to `10^t`.
fn nearest(lambdas: &[f64], t: f64) -> usize {
    (0..lambdas.len())
        .min_by(|&i, &j| {
            (lambdas[i].log10() - t)
                .abs()
                .total_cmp(&(lambdas[j].log10() - t).abs())
        })
        .unwrap()
}

/// The SVD of the constructed `A` returns the designed singular values, and
/// the crate's path (residual, penalty, influence trace) is the ridge path of
/// the SVD formulas (Hansen 1998, section 5.1) at every grid point.
#[test]
fn path_is_the_svd_ridge_path() {
    let (_, reference, t) = setup();
    for (k, s) in reference.s.iter().enumerate() {
        // Designed values s_k = 10^(-0.4 k); 1e-12 relative is a few hundred
        // rounding units of an SVD of a product of three matrices.
        assert!(
            (s / 10f64.powf(-0.4 * k as f64) - 1.0).abs() < 1e-12,
            "s_{k} = {s}"
        );
    }
    let path = trace_unconstrained(&t, &grid(20, 0.0), COLS);
    let mut worst = [0f64; 3];
    for pt in &path.points {
        let lam = pt.solution.lambda;
        let errs = [
            (pt.solution.residual_sq / reference.residual_sq(lam) - 1.0).abs(),
            (pt.solution.penalty_sq / reference.solution_sq(lam) - 1.0).abs(),
            (pt.dof - reference.trace(lam)).abs(),
        ];
        for (w, e) in worst.iter_mut().zip(errs) {
            *w = w.max(e);
        }
    }
    // The crate solves the normal equations by Cholesky; their condition
    // number is at most (1 + lambda)/(s_min^2 + lambda) < 1.6e7 on this grid,
    // so x carries up to ~1.6e7 * 1.1e-16 = 2e-9 relative error and the
    // penalty x'x twice that: 1e-8. The same bound, times the 10 terms of
    // the trace, covers the trace (absolute, the trace is at most 10). The
    // residual is far less sensitive (A maps the badly determined directions
    // of x to short vectors): 1e-9.
    assert!(worst[0] < 1e-9, "residual relative error {:e}", worst[0]);
    assert!(worst[1] < 1e-8, "penalty relative error {:e}", worst[1]);
    assert!(worst[2] < 1e-8, "trace absolute error {:e}", worst[2]);
}

/// GCV score: the crate's `m ||r||^2 / (m - tr H)^2` against the
/// Golub-Heath-Wahba function `V(lambda)` (Technometrics 1979, eq. 1.4)
/// evaluated from the SVD filter factors. The two may differ by a constant
/// factor only; the choice on a 20-per-decade grid must match the minimiser
/// of the exact `V`.
#[test]
fn gcv_matches_golub_heath_wahba_on_a_fine_grid() {
    let (_, reference, t) = setup();
    // Exact minimiser of V over log10 lambda: 200-per-decade scan, then
    // golden section (to 1e-10 decade).
    let best = global_min(|t| reference.gcv(10f64.powf(t)), LO, HI);
    assert!(
        best > LO + 1.0 && best < HI - 1.0,
        "minimum at the edge: 10^{best}"
    );

    for phase in PHASES {
        let lambdas = grid(20, phase);
        let path = trace_unconstrained(&t, &lambdas, COLS);
        let curve = gcv::curve(&path);

        // Constant ratio to 1e-9 (relative spread): both scores are built
        // from residuals and traces that agree to ~1e-10 (path test), which
        // moves the ratio by ~2e-10 / (m - tr H) < 1e-11. A wrong power of
        // (m - tr H) would make it vary like (m - tr H), between 30 and 40.
        let ratios: Vec<f64> = lambdas
            .iter()
            .zip(&curve.score)
            .map(|(&l, &s)| s / reference.gcv(l))
            .collect();
        for (l, r) in lambdas.iter().zip(&ratios) {
            assert!(
                (r / ratios[0] - 1.0).abs() < 1e-9,
                "ratio {r} at {l:e}, first {}",
                ratios[0]
            );
        }

        let chosen = curve.chosen.expect("gcv choice").log10();
        // Tolerance 0.005 decade: the crate fits a parabola through three
        // scores h = 0.05 decade apart; the cubic part of V around its
        // minimum moves the vertex by O(h^2) times the ratio of third to
        // second derivative, under 2e-3 decade for this curve at any grid
        // placement.
        assert!(
            (chosen - best).abs() < 0.005,
            "phase {phase}: gcv chose 10^{chosen:.4}, exact minimum at 10^{best:.4}"
        );
    }
}

/// GCV on a coarse grid (3 per decade): the parabola through three scores a
/// third of a decade apart still lands within 0.1 decade of the exact
/// Golub-Heath-Wahba minimiser. V is flat on the small-lambda side of its
/// minimum and steep on the other (it rises tenfold within 1.5 decades), so a
/// parabola over two thirds of a decade is biased toward the flat side by up
/// to ~0.08 decade depending on where the grid falls; 0.1 decade is under a
/// third of the grid step.
#[test]
fn gcv_on_a_coarse_grid_lands_within_a_tenth_of_a_decade() {
    let (_, reference, t) = setup();
    let best = global_min(|t| reference.gcv(10f64.powf(t)), LO, HI);
    for phase in PHASES {
        let path = trace_unconstrained(&t, &grid(3, phase), COLS);
        let chosen = gcv::curve(&path).chosen.expect("gcv choice").log10();
        assert!(
            (chosen - best).abs() < 0.1,
            "phase {phase}: gcv chose 10^{chosen:.4}, exact minimum at 10^{best:.4}"
        );
    }
}

/// Wahba's variance estimate `||r||^2 / (m - tr H)` (the estimator of
/// `gcv::noise_variance`) equals its SVD form at the GCV grid point and, with
/// about 34 residual degrees of freedom, lies within a factor of two of the
/// true `sigma^2` (a chi-square variable with 30 degrees of freedom falls
/// in [0.5, 2] times its mean with probability about 0.99; with the fixed
/// seed it is one fixed number, 0.98 sigma^2).
#[test]
fn noise_variance_matches_the_svd_formula() {
    let (pr, reference, t) = setup();
    let lambdas = grid(20, 0.0);
    let path = trace_unconstrained(&t, &lambdas, COLS);
    let i = super::argmin(&gcv::curve(&path).score).unwrap();
    let lam = lambdas[i];
    let want = reference.residual_sq(lam) / (ROWS as f64 - reference.trace(lam));
    let got = gcv::noise_variance(&path, i);
    // 1e-9: as for the residual and trace in the path test.
    assert!((got / want - 1.0).abs() < 1e-9, "{got} vs {want}");
    let ratio = got / (pr.sigma * pr.sigma);
    assert!(
        (0.5..2.0).contains(&ratio),
        "sigma^2 estimate / truth = {ratio}"
    );
}

/// Morozov's discrepancy principle with the true sigma: the largest lambda
/// with `||r(lambda)||^2 = m sigma^2` (Morozov 1966), where the SVD gives
/// `||r||^2 = sum (lambda/(s^2+lambda))^2 beta^2 + ||b_perp||^2`
/// (Hansen 1998, section 5.1 and chapter 7). `||r||^2` increases with
/// lambda (its derivative `sum 2 lambda s^2 beta^2/(s^2+lambda)^3` is
/// positive), so the root is unique and bisection finds it.
#[test]
fn discrepancy_matches_the_morozov_root() {
    use std::f64::consts::LN_10;
    let (pr, reference, t) = setup();
    let target = (ROWS as f64 * pr.sigma * pr.sigma).ln();
    // psi(u) = ln ||r||^2 at lambda = e^u.
    let psi = |u: f64| reference.residual_sq(u.exp()).ln();
    let (mut lo, mut hi) = (LO * LN_10, HI * LN_10);
    assert!(psi(lo) < target && psi(hi) > target, "no sign change");
    while hi - lo > 1e-12 {
        let mid = 0.5 * (lo + hi);
        if psi(mid) < target {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let root = 0.5 * (lo + hi);
    assert!(root > (LO + 1.0) * LN_10 && root < (HI - 1.0) * LN_10);

    let per_decade = 20;
    let h = LN_10 / per_decade as f64;
    for phase in PHASES {
        let lambdas = grid(per_decade, phase);
        let path = trace_unconstrained(&t, &lambdas, COLS);
        let chosen = discrepancy::curve_with_variance(&path, pr.sigma * pr.sigma)
            .chosen
            .expect("discrepancy choice")
            .ln();

        // Tolerance: the crate interpolates ln(score) linearly in ln(lambda)
        // between the two grid points around the root. On a cell of width h
        // the interpolant is off by at most h^2/8 max|psi''|, and its slope
        // is at least min psi', so the root moves by at most
        // h^2/8 max|psi''| / min psi' (~1.4e-3 decade here). Both derivatives
        // come from the SVD sums (psi' = lambda R'/R,
        // psi'' = psi' + lambda^2 R''/R - psi'^2, with R = ||r||^2), sampled
        // over the cell; 10% margin for the sampling.
        let cell = lambdas.iter().rposition(|l| l.ln() <= root).unwrap();
        let (a, b) = (lambdas[cell].ln(), lambdas[cell + 1].ln());
        let (mut d2_max, mut d1_min) = (0f64, f64::INFINITY);
        for k in 0..=100 {
            let lam = (a + (b - a) * k as f64 / 100.0).exp();
            let [r, r1, r2, ..] = reference.derivatives(lam);
            let g = lam * r1 / r;
            d1_min = d1_min.min(g);
            d2_max = d2_max.max((g + lam * lam * r2 / r - g * g).abs());
        }
        let bound = h * h / 8.0 * d2_max / d1_min;
        let err = (chosen - root).abs();
        assert!(
            err <= 1.1 * bound + 1e-9,
            "phase {phase}: discrepancy chose e^{chosen:.6}, root e^{root:.6}, \
             error {err:e} > bound {bound:e}"
        );
    }
}

/// L-curve: the crate's finite-difference curvature of
/// `(ln ||r||, ln ||x||)` against the analytic curvature from the SVD sums
/// (Hansen & O'Leary 1993, section 3; Hansen 1998, section 7.5), the corner
/// (largest positive curvature) against the analytic maximiser, and the sign
/// convention: positive at the corner, where the curve, traversed with
/// increasing lambda, turns counter-clockwise from its steep branch to its
/// flat one.
#[test]
fn lcurve_corner_matches_the_analytic_curvature_maximum() {
    let (_, reference, t) = setup();
    // The corner: maximiser of the analytic curvature (scan + golden section
    // on -kappa).
    let best = global_min(|t| -reference.curvature(10f64.powf(t)), LO, HI);
    let peak = reference.curvature(10f64.powf(best));
    assert!(peak > 10.0, "analytic peak curvature {peak}");

    for phase in PHASES {
        let lambdas = grid(20, phase);
        let path = trace_unconstrained(&t, &lambdas, COLS);
        let curve = lcurve::curve(&path);

        for (i, &l) in lambdas.iter().enumerate() {
            // The two analytic forms agree; 1e-8 of the peak allows for
            // rounding in the second-derivative sums (measured ~1e-15).
            let (k1, k2) = (reference.curvature(l), reference.curvature_first_order(l));
            assert!((k1 - k2).abs() < 1e-8 * peak, "{k1} vs {k2} at {l:e}");
            // Pointwise: central differences 0.05 decade apart (h = 0.115 in
            // ln lambda) carry an O(h^2) error; 0.5% of the peak bounds it on
            // this curve (measured below 0.1%). End points have no curvature.
            if i > 0 && i + 1 < lambdas.len() {
                let s = curve.score[i];
                assert!(
                    (s - k1).abs() < 5e-3 * peak,
                    "curvature {s} vs analytic {k1} at {l:e}"
                );
            }
        }

        let chosen = curve.chosen.expect("l-curve corner").log10();
        // Tolerance 0.005 decade: the crate's parabola vertex through three
        // finite-difference curvatures 0.05 decade apart; the O(h^2) error of
        // the differences and the cubic part of kappa near its peak move the
        // vertex by ~1e-3 decade at any grid placement.
        assert!(
            (chosen - best).abs() < 0.005,
            "phase {phase}: l-curve chose 10^{chosen:.4}, analytic corner at 10^{best:.4}"
        );

        // Sign convention: positive and large at the corner; negative at the
        // second, concave bend near lambda = s_max^2 = 1, where the flat
        // branch falls towards small solution norms.
        let i_corner = nearest(&lambdas, best);
        assert!(
            curve.score[i_corner] > 0.9 * peak,
            "{}",
            curve.score[i_corner]
        );
        let i_bend = nearest(&lambdas, 0.0);
        assert!(curve.score[i_bend] < -0.5, "{}", curve.score[i_bend]);
    }
}
