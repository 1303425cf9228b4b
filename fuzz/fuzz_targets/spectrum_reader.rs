//! Arbitrary bytes into the spectrum reader: it returns a spectrum or an
//! error, never panics, hangs or exhausts memory.

#![no_main]

use libfuzzer_sys::fuzz_target;
use std::path::Path;
use taumap::io::spectrum::parse_spectrum_with_layout;

fuzz_target!(|data: &[u8]| {
    if let Ok((spectrum, layout)) = parse_spectrum_with_layout(data, Path::new("fuzz.csv")) {
        // What the reader promises about its output (src/io/spectrum.rs).
        let n = spectrum.len();
        assert_eq!(spectrum.z_re_ohm.len(), n);
        assert_eq!(spectrum.z_im_ohm.len(), n);
        assert!(n >= taumap::io::spectrum::MIN_POINTS);
        assert!(
            spectrum
                .frequency_hz
                .windows(2)
                .all(|w| w[0] > 0.0 && w[0] < w[1] && w[1].is_finite()),
            "frequencies not positive, finite and strictly ascending"
        );
        assert!(
            spectrum
                .z_re_ohm
                .iter()
                .chain(&spectrum.z_im_ohm)
                .all(|v| v.is_finite()),
            "non-finite impedance"
        );
        assert!(layout.header_line >= 1);
    }
});
