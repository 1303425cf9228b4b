//! Axis ranges, tick positions and tick labels.
//!
//! Everything is computed in plot coordinates: the value itself on a linear
//! axis, `log10` of the value on a logarithmic one. Plotters then only ever
//! sees plain linear `f64` ranges with explicit tick positions, which keeps
//! tick placement and labelling under this module's control.

/// How data values map to plot coordinates.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Scale {
    /// Plot coordinate = value.
    Linear,
    /// Plot coordinate = log10(value); only positive values are plottable.
    Log,
}

impl Scale {
    /// Plot coordinate of `v`, or `None` if `v` cannot be shown on this scale
    /// (NaN, infinite, or not positive on a log scale).
    pub fn to_plot(self, v: f64) -> Option<f64> {
        match self {
            Scale::Linear => v.is_finite().then_some(v),
            Scale::Log => (v.is_finite() && v > 0.0).then(|| v.log10()),
        }
    }
}

/// Running minimum and maximum of plottable values, before padding.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Extent {
    scale: Scale,
    lo: f64,
    hi: f64,
}

impl Extent {
    /// An empty extent on `scale`.
    pub fn new(scale: Scale) -> Self {
        Self {
            scale,
            lo: f64::INFINITY,
            hi: f64::NEG_INFINITY,
        }
    }

    /// Includes data value `v`; unplottable values are ignored.
    pub fn add(&mut self, v: f64) {
        if let Some(p) = self.scale.to_plot(v) {
            self.lo = self.lo.min(p);
            self.hi = self.hi.max(p);
        }
    }

    /// Includes every value of `vs`.
    pub fn add_all(&mut self, vs: impl IntoIterator<Item = f64>) {
        vs.into_iter().for_each(|v| self.add(v));
    }

    /// Minimum and maximum plot coordinates, or `None` if nothing was added.
    pub fn raw(&self) -> Option<(f64, f64)> {
        (self.lo <= self.hi).then_some((self.lo, self.hi))
    }

    /// Padded axis. `what` names the quantity in the error message.
    ///
    /// Fails when no plottable value was added or when the values are too
    /// large for their span to be finite.
    pub fn finish(&self, what: &str) -> Result<Axis, String> {
        let (lo, hi) = self.raw().ok_or_else(|| match self.scale {
            Scale::Linear => format!("no finite {what} values to plot"),
            Scale::Log => format!("no positive finite {what} values to plot on a log axis"),
        })?;
        let (lo, hi) = pad(self.scale, lo, hi);
        if !(hi - lo).is_finite() {
            return Err(format!("{what} values are too large to plot"));
        }
        Ok(Axis {
            scale: self.scale,
            lo,
            hi,
        })
    }
}

/// Widens `[lo, hi]` by 5 % on each side; a zero-width range gets a fixed
/// width (one decade on a log axis, 10 % of the value or 1 on a linear one).
pub(crate) fn pad(scale: Scale, lo: f64, hi: f64) -> (f64, f64) {
    let span = hi - lo;
    let size = lo.abs().max(hi.abs());
    // On a log axis the coordinates of values near 1 are near 0, so a
    // relative test would take rounding (1 vs 1 + 2e-16, 1e-16 decade) for
    // a range; below 1e-9 decade the values are one value.
    let wide = match scale {
        Scale::Log => span > 1e-9,
        Scale::Linear => span > 1e-12 * size && span > f64::MIN_POSITIVE,
    };
    if wide {
        let m = 0.05 * span;
        return (lo - m, hi + m);
    }
    let mid = 0.5 * (lo + hi);
    let half = match scale {
        Scale::Log => 0.5,
        Scale::Linear if size > f64::MIN_POSITIVE => 0.1 * size,
        Scale::Linear => 1.0,
    };
    (mid - half, mid + half)
}

/// A finished axis: plot-coordinate range `[lo, hi]` with `lo < hi`.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Axis {
    /// Mapping from values to plot coordinates.
    pub scale: Scale,
    /// Lower end in plot coordinates.
    pub lo: f64,
    /// Upper end in plot coordinates.
    pub hi: f64,
}

impl Axis {
    /// Whether the plot coordinate `p` lies in the range.
    pub fn contains(&self, p: f64) -> bool {
        self.lo <= p && p <= self.hi
    }

    /// Tick marks with at most about `max_ticks` labelled ticks.
    pub fn ticks(&self, max_ticks: usize) -> Ticks {
        let max_ticks = max_ticks.max(2);
        match self.scale {
            Scale::Linear => self.linear_ticks(nice_step(self.hi - self.lo, max_ticks)),
            Scale::Log => log_ticks(self.lo, self.hi, max_ticks),
        }
    }

    /// Ticks at the multiples of `step` (plot coordinates, linear axes).
    pub fn linear_ticks(&self, step: f64) -> Ticks {
        Ticks {
            bold: multiples(self.lo, self.hi, step),
            light: Vec::new(),
            kind: TickKind::Linear { step },
        }
    }
}

/// Step 1, 2 or 5 times a power of ten giving at most `max_ticks` intervals.
pub(crate) fn nice_step(span: f64, max_ticks: usize) -> f64 {
    let raw = span.abs() / max_ticks.max(1) as f64;
    if !(raw.is_finite() && raw > 0.0) {
        return 1.0;
    }
    let mag = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .map(|m| m * mag)
        .find(|&s| s >= raw * (1.0 - 1e-9))
        .unwrap_or(10.0 * mag)
}

/// Multiples of `step` inside `[lo, hi]` (at most 1000 of them).
fn multiples(lo: f64, hi: f64, step: f64) -> Vec<f64> {
    if !(step.is_finite() && step > 0.0) {
        return Vec::new();
    }
    let first = (lo / step - 1e-9).ceil();
    let last = (hi / step + 1e-9).floor();
    if !(first.is_finite() && last.is_finite() && (0.0..=1000.0).contains(&(last - first))) {
        return Vec::new();
    }
    // An integer count, not `k += 1.0`: beyond 2^53 adding one to a float
    // changes nothing, and a range far narrower than its position (a
    // constant |Z| of 1 ohm fitted to 1 + 2e-16) once looped forever here.
    let count = (last - first) as usize;
    (0..=count).map(|i| (first + i as f64) * step).collect()
}

fn log_ticks(lo: f64, hi: f64, max_ticks: usize) -> Ticks {
    let first = lo.ceil() as i64;
    let last = hi.floor() as i64;
    let decades = last - first + 1;
    if decades >= 4 {
        return decade_ticks(lo, hi, max_ticks);
    }
    // Few decades: label intermediate values too, as long as they fit.
    let candidates = |mantissas: &[u32]| -> Vec<f64> {
        (lo.floor() as i64 - 1..=hi.ceil() as i64)
            .flat_map(|k| {
                mantissas
                    .iter()
                    .map(move |&m| k as f64 + f64::from(m).log10())
            })
            .filter(|p| lo <= *p && *p <= hi)
            .collect()
    };
    let all = candidates(&[1, 2, 3, 4, 5, 6, 7, 8, 9]);
    let fits = |t: &[f64]| (3..=max_ticks + 1).contains(&t.len());
    for set in [&[1, 2, 5][..], &[1, 3]] {
        let bold = candidates(set);
        if fits(&bold) {
            let light = all.iter().copied().filter(|p| !bold.contains(p)).collect();
            return mantissa_ticks(bold, light);
        }
    }
    if decades >= 2 {
        return decade_ticks(lo, hi, max_ticks);
    }
    if fits(&all) {
        return mantissa_ticks(all, Vec::new());
    }
    // Very narrow range: evenly spaced values, placed on the log axis.
    let (vlo, vhi) = (10f64.powf(lo), 10f64.powf(hi));
    let step = nice_step(vhi - vlo, max_ticks);
    Ticks {
        bold: multiples(vlo, vhi, step)
            .into_iter()
            .filter(|v| *v > 0.0)
            .map(f64::log10)
            .collect(),
        light: Vec::new(),
        kind: TickKind::LogLinear { step },
    }
}

/// Ticks at powers of ten (every `stride`-th when there are many), minor
/// lines at the other integer mantissas (up to six decades) or at the
/// unlabelled decades.
fn decade_ticks(lo: f64, hi: f64, max_ticks: usize) -> Ticks {
    let (first, last) = (lo.ceil() as i64, hi.floor() as i64);
    let n = (last - first + 1).max(1) as usize;
    let stride = n.div_ceil(max_ticks).max(1) as i64;
    let bold: Vec<f64> = (first..=last)
        .filter(|k| k.rem_euclid(stride) == 0)
        .map(|k| k as f64)
        .collect();
    // Minor lines at 2..9 only while they stay sparse enough to read.
    let light: Vec<f64> = if stride == 1 && n <= 6 {
        (first - 1..=last)
            .flat_map(|k| (2..=9).map(move |m| k as f64 + f64::from(m).log10()))
            .filter(|p| lo <= *p && *p <= hi)
            .collect()
    } else {
        (first..=last)
            .filter(|k| k.rem_euclid(stride) != 0)
            .map(|k| k as f64)
            .collect()
    };
    Ticks {
        bold,
        light,
        kind: TickKind::Decades,
    }
}

/// Ticks at `m × 10^k`, labelled as plain numbers when every tick lies
/// between 0.01 and 9999.
fn mantissa_ticks(bold: Vec<f64>, light: Vec<f64>) -> Ticks {
    let plain = bold
        .iter()
        .all(|p| (-2.0..4.0).contains(&(p + 1e-9).floor()));
    Ticks {
        bold,
        light,
        kind: TickKind::Mantissa { plain },
    }
}

/// How tick values are labelled.
#[derive(Clone, Copy, Debug)]
pub(crate) enum TickKind {
    /// Linear axis, ticks at multiples of `step`.
    Linear { step: f64 },
    /// Log axis, ticks at powers of ten.
    Decades,
    /// Log axis, ticks at `m × 10^k` for integer mantissas `m`; `plain`
    /// labels them as decimals rather than in `m×10ᵏ` notation.
    Mantissa { plain: bool },
    /// Log axis, ticks at multiples of `step` in value space.
    LogLinear { step: f64 },
}

/// Tick positions (plot coordinates) and their labelling rule.
#[derive(Clone, Debug)]
pub(crate) struct Ticks {
    /// Labelled ticks with a major grid line.
    pub bold: Vec<f64>,
    /// Minor grid lines.
    pub light: Vec<f64>,
    /// Labelling rule.
    pub kind: TickKind,
}

impl Ticks {
    /// Label of the tick at plot coordinate `p`.
    pub fn label(&self, p: f64) -> String {
        match self.kind {
            TickKind::Linear { step } => fmt_step(p, step),
            TickKind::Decades => power_of_ten(p.round() as i64),
            TickKind::Mantissa { plain } => {
                let k = (p + 1e-9).floor();
                let m = 10f64.powf(p - k).round() as i64;
                let k = k as i64;
                if plain {
                    fmt_step(10f64.powf(p), 10f64.powi(k as i32))
                } else if m == 1 {
                    power_of_ten(k)
                } else {
                    format!("{m}×{}", power_of_ten(k))
                }
            }
            TickKind::LogLinear { step } => fmt_step(10f64.powf(p), step),
        }
    }
}

/// `10` with a superscript exponent, e.g. `10⁻³`.
pub(crate) fn power_of_ten(k: i64) -> String {
    format!("10{}", superscript(k))
}

fn superscript(k: i64) -> String {
    const DIGITS: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let mut s = String::new();
    if k < 0 {
        s.push('⁻');
    }
    for c in k.unsigned_abs().to_string().chars() {
        let d = c
            .to_digit(10)
            .expect("to_string of an integer yields digits") as usize;
        s.push(DIGITS[d]);
    }
    s
}

/// Formats `v`, a multiple of `step`, with just enough decimals; very large
/// or very small magnitudes use `m×10ᵏ` notation.
pub(crate) fn fmt_step(v: f64, step: f64) -> String {
    if v.abs() <= step.abs() * 1e-6 {
        return "0".to_string();
    }
    let step_exp = step.abs().log10().floor() as i64;
    let decimals = (-step_exp).max(0) as usize;
    let v_exp = v.abs().log10().floor() as i64;
    if v_exp >= 5 || decimals > 4 {
        let digits = (v_exp - step_exp).clamp(0, 3) as usize;
        return fmt_sci(v, digits);
    }
    format!("{v:.decimals$}")
}

/// `v` as `m×10ᵏ` with `digits` decimals in the mantissa (plain for 10⁰).
pub(crate) fn fmt_sci(v: f64, digits: usize) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let mut k = v.abs().log10().floor() as i64;
    let mut m = v / 10f64.powi(k as i32);
    // Rounding can carry the mantissa to 10 (9.996 -> "10.00").
    if format!("{:.digits$}", m.abs()).starts_with("10") {
        k += 1;
        m /= 10.0;
    }
    let mantissa = format!("{m:.digits$}");
    if k == 0 {
        mantissa
    } else {
        format!("{mantissa}×{}", power_of_ten(k))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn decade_labels_use_superscripts() {
        let axis = Axis {
            scale: Scale::Log,
            lo: -3.2,
            hi: 1.1,
        };
        // (five decades: minor lines at 2..9 are kept)
        let t = axis.ticks(8);
        let labels: Vec<String> = t.bold.iter().map(|&p| t.label(p)).collect();
        assert_eq!(labels, ["10⁻³", "10⁻²", "10⁻¹", "10⁰", "10¹"]);
        assert!(!t.light.is_empty());
    }

    #[test]
    fn few_decades_get_intermediate_labels() {
        let label = |lo: f64, hi: f64, n: usize| {
            let t = Axis {
                scale: Scale::Log,
                lo,
                hi,
            }
            .ticks(n);
            t.bold.iter().map(|&p| t.label(p)).collect::<Vec<_>>()
        };
        assert_eq!(label(-1.1, 1.74, 5), ["0.1", "0.3", "1", "3", "10", "30"]);
        assert_eq!(label(-4.4, -3.1, 6), ["5×10⁻⁵", "10⁻⁴", "2×10⁻⁴", "5×10⁻⁴"]);
    }

    #[test]
    fn narrow_log_axis_still_has_ticks() {
        for (lo, hi) in [(1.0, 1.9), (0.5, 1.5), (1.0, 1.02), (-7.3, -6.9)] {
            let axis = Axis {
                scale: Scale::Log,
                lo,
                hi,
            };
            let t = axis.ticks(6);
            assert!(t.bold.len() >= 2, "{lo}..{hi}: {:?}", t.bold);
            assert!(t.bold.iter().all(|p| axis.contains(*p)));
        }
    }

    #[test]
    fn linear_labels_have_step_precision() {
        let axis = Axis {
            scale: Scale::Linear,
            lo: -0.03,
            hi: 0.31,
        };
        let t = axis.ticks(8);
        let labels: Vec<String> = t.bold.iter().map(|&p| t.label(p)).collect();
        assert_eq!(
            labels,
            ["0", "0.05", "0.10", "0.15", "0.20", "0.25", "0.30"]
        );
        assert_eq!(fmt_step(2.5e-6, 5e-7), "2.5×10⁻⁶");
        assert_eq!(fmt_step(-3e5, 1e5), "-3×10⁵");
        assert_eq!(fmt_sci(9.9996e-4, 2), "1.00×10⁻³");
    }

    /// A range far narrower than its distance from zero gives a bounded
    /// list of ticks (it once looped forever: 1 + k ulp never changed k).
    #[test]
    fn multiples_terminate_far_from_zero() {
        let step = 5e-17;
        let t = multiples(1.0, 1.0 + 2.0 * f64::EPSILON, step);
        assert!(t.len() <= 1001, "{}", t.len());
        assert!(multiples(1e300, 1e300, 1e-300).is_empty());
        // Normal use unchanged: 0, 0.5, 1, 1.5, 2.
        assert_eq!(multiples(-0.1, 2.1, 0.5), vec![0.0, 0.5, 1.0, 1.5, 2.0]);
    }

    /// |Z| = 1 ohm against a fit of 1 + 2e-16 ohm is one value on a log
    /// axis: a decade around it, with decade ticks.
    #[test]
    fn log_axis_of_a_constant_with_rounding_is_a_decade() {
        let mut e = Extent::new(Scale::Log);
        e.add_all([1.0, 1.0 + 2.0 * f64::EPSILON]);
        let a = e.finish("|Z|").unwrap();
        assert!((a.hi - a.lo - 1.0).abs() < 1e-12, "{} {}", a.lo, a.hi);
        let t = a.ticks(5);
        assert!(!t.bold.is_empty() && t.bold.len() < 20, "{:?}", t.bold);
    }

    #[test]
    fn padding_handles_degenerate_ranges() {
        assert_eq!(pad(Scale::Linear, 0.0, 0.0), (-1.0, 1.0));
        let (lo, hi) = pad(Scale::Linear, 5.0, 5.0);
        assert!(lo < 5.0 && hi > 5.0);
        assert_eq!(pad(Scale::Log, 2.0, 2.0), (1.5, 2.5));
        let mut e = Extent::new(Scale::Log);
        e.add_all([f64::NAN, -1.0, 0.0]);
        assert!(e.finish("tau").is_err());
    }
}
