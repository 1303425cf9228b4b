//! Trends of a track against the series label: straight lines by ordinary
//! least squares with standard errors, and Arrhenius activation energies.
//!
//! For points `(x_i, y_i)`, `i = 1..n`, the least-squares line
//! `y = a + b x` has
//!
//! $$ b = \frac{S_{xy}}{S_{xx}}, \quad a = \bar y - b \bar x, \quad
//!    s^2 = \frac{\sum (y_i - a - b x_i)^2}{n - 2}, \quad
//!    \mathrm{se}(b) = \sqrt{s^2 / S_{xx}} $$
//!
//! (any regression text, e.g. N. R. Draper and H. Smith, *Applied
//! Regression Analysis*, 3rd ed., Wiley 1998, ch. 1). The standard error
//! needs `n >= 3`; with two points the slope is given without it.
//!
//! Arrhenius: a thermally activated time constant or resistance follows
//! `tau = tau_0 exp(E_a / (k_B T))`, so `ln tau` is a straight line in
//! `1/(k_B T)` with slope `E_a` (S. Arrhenius, Z. Phys. Chem. 4, 226, 1889).
//! The fit is of `ln(1/tau)` (and `ln(1/R)`, the conductance) against
//! `1/(k_B T)`: the slope is `-E_a`, reported as `E_a` in eV with its
//! standard error.

use crate::{Error, Result};

/// Boltzmann constant in eV/K: 8.617333262e-5 (CODATA 2018; exact since
/// the 2019 SI fixed k_B = 1.380649e-23 J/K and e = 1.602176634e-19 C).
pub const K_B_EV_PER_K: f64 = 8.617_333_262e-5;

/// 0 degrees Celsius in kelvin.
pub const ZERO_CELSIUS_K: f64 = 273.15;

/// A straight line fitted by least squares.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct LineFit {
    /// Slope `b`.
    pub slope: f64,
    /// Standard error of the slope (`None` with two points; 0 when every
    /// point lies on the line exactly).
    pub slope_se: Option<f64>,
    /// Intercept `a`.
    pub intercept: f64,
    /// Number of points.
    pub points: usize,
}

/// Fits `y = a + b x` by ordinary least squares; `None` with fewer than two
/// points or when every x is the same.
pub fn fit_line(x: &[f64], y: &[f64]) -> Option<LineFit> {
    let n = x.len().min(y.len());
    if n < 2 {
        return None;
    }
    let nf = n as f64;
    let mx = x[..n].iter().sum::<f64>() / nf;
    let my = y[..n].iter().sum::<f64>() / nf;
    let (mut sxx, mut sxy) = (0.0, 0.0);
    for i in 0..n {
        sxx += (x[i] - mx) * (x[i] - mx);
        sxy += (x[i] - mx) * (y[i] - my);
    }
    if !(sxx > 0.0 && sxx.is_finite() && sxy.is_finite()) {
        return None;
    }
    let slope = sxy / sxx;
    let intercept = my - slope * mx;
    let slope_se = (n >= 3).then(|| {
        let rss: f64 = (0..n)
            .map(|i| (y[i] - intercept - slope * x[i]).powi(2))
            .sum();
        (rss / (nf - 2.0) / sxx).sqrt()
    });
    Some(LineFit {
        slope,
        slope_se,
        intercept,
        points: n,
    })
}

/// The unit of a temperature label.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
pub enum TemperatureUnit {
    /// Kelvin.
    #[serde(rename = "K")]
    Kelvin,
    /// Degrees Celsius.
    #[serde(rename = "degC")]
    Celsius,
}

impl TemperatureUnit {
    /// The label in kelvin; fails for a temperature at or below absolute
    /// zero.
    pub fn kelvin(self, label: f64) -> Result<f64> {
        let t = match self {
            TemperatureUnit::Kelvin => label,
            TemperatureUnit::Celsius => label + ZERO_CELSIUS_K,
        };
        if t.is_finite() && t > 0.0 {
            Ok(t)
        } else {
            Err(Error::Data(format!(
                "a temperature label of {label} {} is at or below absolute zero",
                self.name()
            )))
        }
    }

    /// The unit's name as written on the command line and in files.
    pub fn name(self) -> &'static str {
        match self {
            TemperatureUnit::Kelvin => "K",
            TemperatureUnit::Celsius => "degC",
        }
    }
}

/// An activation energy from an Arrhenius fit.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Activation {
    /// Activation energy (eV).
    pub ea_ev: f64,
    /// Its standard error (eV); `None` from two temperatures.
    pub ea_se_ev: Option<f64>,
    /// Intercept `a` of `ln(1/y) = a - E_a / (k_B T)` (`y` in s or ohm).
    pub intercept: f64,
}

/// Fits `ln(1/y) = a - E_a/(k_B T)` to values `y > 0` at temperatures
/// `t_k` (kelvin); `None` with fewer than two usable points.
pub fn arrhenius(t_k: &[f64], y: &[f64]) -> Option<Activation> {
    let (x, ly): (Vec<f64>, Vec<f64>) = t_k
        .iter()
        .zip(y)
        .filter(|(t, v)| t.is_finite() && **t > 0.0 && v.is_finite() && **v > 0.0)
        .map(|(t, v)| (1.0 / (K_B_EV_PER_K * t), -v.ln()))
        .unzip();
    let line = fit_line(&x, &ly)?;
    Some(Activation {
        ea_ev: -line.slope,
        ea_se_ev: line.slope_se,
        intercept: line.intercept,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_line_through_known_points() {
        // y = 2 + 3x with residuals +-0.1 alternating over x = 0..4:
        // slope 3 - 0.02 (the residual pattern's own slope), se by hand.
        let x = [0.0, 1.0, 2.0, 3.0, 4.0];
        let e = [0.1, -0.1, 0.1, -0.1, 0.1];
        let y: Vec<f64> = x.iter().zip(e).map(|(x, e)| 2.0 + 3.0 * x + e).collect();
        let l = fit_line(&x, &y).unwrap();
        // Sxx = 10, Sxe = (-2)(0.1) + (-1)(-0.1) + 0 + (1)(-0.1) + 2(0.1) = 0.
        assert!((l.slope - 3.0).abs() < 1e-12);
        // Intercept: mean(e) = 0.02 -> a = 2.02.
        assert!((l.intercept - 2.02).abs() < 1e-12);
        // RSS = sum (e - 0.02)^2 = 3(0.08^2) + 2(0.12^2) = 0.048; s^2 = 0.016;
        // se = sqrt(0.016/10) = 0.04.
        assert!((l.slope_se.unwrap() - 0.04).abs() < 1e-12);
        assert!(fit_line(&[1.0], &[1.0]).is_none());
        assert!(fit_line(&[1.0, 1.0], &[1.0, 2.0]).is_none());
        assert_eq!(fit_line(&[1.0, 2.0], &[1.0, 2.0]).unwrap().slope_se, None);
    }

    #[test]
    fn boltzmann_constant_from_the_si_definitions() {
        // k = 1.380649e-23 J/K and e = 1.602176634e-19 C, both exact in the
        // 2019 SI (BIPM, The International System of Units, 9th ed.).
        let k = 1.380649e-23 / 1.602176634e-19;
        assert!((K_B_EV_PER_K / k - 1.0).abs() < 1e-9, "{k:e}");
    }

    #[test]
    fn arrhenius_recovers_the_activation_energy() {
        // tau = 1e-9 s exp(0.9 eV / (k_B T)) from 500 to 800 degC.
        let t_k: Vec<f64> = (0..7)
            .map(|i| {
                TemperatureUnit::Celsius
                    .kelvin(500.0 + 50.0 * i as f64)
                    .unwrap()
            })
            .collect();
        let tau: Vec<f64> = t_k
            .iter()
            .map(|t| 1e-9 * (0.9 / (K_B_EV_PER_K * t)).exp())
            .collect();
        let a = arrhenius(&t_k, &tau).unwrap();
        assert!((a.ea_ev - 0.9).abs() < 1e-9, "{}", a.ea_ev);
        assert!(a.ea_se_ev.unwrap() < 1e-9);
        assert!((a.intercept - (1e9f64).ln()).abs() < 1e-6);
        assert!(TemperatureUnit::Celsius.kelvin(-300.0).is_err());
        assert_eq!(TemperatureUnit::Kelvin.kelvin(300.0).unwrap(), 300.0);
    }
}
