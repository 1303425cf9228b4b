//! Arbitrary finite spectra through the whole spectrum inversion and the
//! report writers: each step returns a result or an error, never panics,
//! hangs or exhausts memory.
//!
//! Input layout (missing bytes read as zero):
//! - byte 0: the number of points, 5 + (byte & 0x3f) % 36, so 5 to 40;
//!   bit 7 computes every rule's curve (`all_curves`, the command line's
//!   default) instead of the library's default of one sweep;
//! - then per point a frequency, a real part and an imaginary part, each a
//!   tag byte and its payload (see [`Input::frequency_hz`] and
//!   [`Input::value`]).
//!
//! Points whose frequency is not positive and finite, repeated frequencies
//! and non-finite impedances are refused by `Spectrum::new`, as they are by
//! the readers, and end the run early. So do spectra spanning more than
//! [`MAX_SPAN_DECADES`] decades of frequency: the tau grid grows with the
//! span (10 points per decade, up to 4001 points), and a 40-point spectrum
//! over 380 decades takes several seconds and about 1 GB per inversion
//! (docs/fuzzing.md), which would stall the campaign without telling
//! anything new about spectra an instrument can measure.

#![no_main]

use libfuzzer_sys::fuzz_target;
use taumap::io::Spectrum;
use taumap::pipeline::{InvertParams, invert};
use taumap::report::{self, Summary};

/// Widest frequency span inverted (decades): twice what the widest
/// instruments sweep (10 uHz to 10 MHz is 12 decades).
const MAX_SPAN_DECADES: f64 = 24.0;

/// Reads the fuzzer's bytes front to back, zeros past the end.
struct Input<'a> {
    bytes: &'a [u8],
}

impl Input<'_> {
    fn take<const N: usize>(&mut self) -> [u8; N] {
        let mut out = [0u8; N];
        let n = N.min(self.bytes.len());
        out[..n].copy_from_slice(&self.bytes[..n]);
        self.bytes = &self.bytes[n..];
        out
    }

    fn u8(&mut self) -> u8 {
        self.take::<1>()[0]
    }

    /// Tag 0: any f64 bit pattern (its absolute value), so subnormal,
    /// huge, zero and non-finite frequencies occur; tags 1 to 3: log-uniform
    /// over 1e-5..1e9 Hz from 16 bits, the range instruments cover and more.
    fn frequency_hz(&mut self) -> f64 {
        match self.u8() % 4 {
            0 => f64::from_le_bytes(self.take()).abs(),
            _ => {
                let u = f64::from(u16::from_le_bytes(self.take()));
                10f64.powf(-5.0 + 14.0 * u / 65535.0)
            }
        }
    }

    /// Tag 0: any f64 bit pattern; 1: a 16-bit mantissa times a power of
    /// ten from -30 to 30 (every magnitude a unit prefix reaches); 2: a
    /// small integer (exact zeros, constants, repeated values); 3: any f32
    /// bit pattern.
    fn value(&mut self) -> f64 {
        match self.u8() % 4 {
            0 => f64::from_le_bytes(self.take()),
            1 => {
                let mantissa = f64::from(i16::from_le_bytes(self.take())) / 32768.0;
                let exponent = i32::from(i8::from_le_bytes(self.take())) % 31;
                mantissa * 10f64.powi(exponent)
            }
            2 => f64::from(i8::from_le_bytes(self.take())),
            _ => f64::from(f32::from_le_bytes(self.take())),
        }
    }
}

fuzz_target!(|data: &[u8]| {
    let mut input = Input { bytes: data };
    let head = input.u8();
    let n = 5 + usize::from(head & 0x3f) % 36;
    let mut frequency_hz = Vec::with_capacity(n);
    let mut z_re_ohm = Vec::with_capacity(n);
    let mut z_im_ohm = Vec::with_capacity(n);
    for _ in 0..n {
        frequency_hz.push(input.frequency_hz());
        z_re_ohm.push(input.value());
        z_im_ohm.push(input.value());
    }
    let Ok(spectrum) = Spectrum::new(frequency_hz, z_re_ohm, z_im_ohm) else {
        return;
    };
    let span_decades =
        (spectrum.frequency_hz[spectrum.len() - 1] / spectrum.frequency_hz[0]).log10();
    if span_decades > MAX_SPAN_DECADES {
        return;
    }
    let mut params = InvertParams::default();
    params.drt.all_curves = head & 0x80 != 0;
    let Ok(inv) = invert(&spectrum, &params) else {
        return;
    };
    assert_eq!(inv.fit.fit_re_ohm.len(), spectrum.len());
    assert_eq!(inv.fit.fit_im_ohm.len(), spectrum.len());
    let summary = Summary::new("fuzz.csv", &spectrum, &params, &inv);
    let json = summary.to_json();
    assert!(json.ends_with('\n'));
    let drt = report::drt_csv(&inv.drt);
    assert_eq!(drt.lines().count(), inv.drt.tau_s.len() + 1);
    let _ = report::fit_csv(&spectrum, &inv.fit);
    let _ = report::lambda_csv(&inv.drt.lambda);
});
