//! Checks shared by the plot tests.

use std::collections::BTreeSet;

/// Asserts that `bytes` is a PNG of `size` pixels that is not a blank image.
pub(crate) fn check_png(bytes: &[u8], size: (u32, u32)) {
    assert!(
        bytes.starts_with(b"\x89PNG\r\n\x1a\n"),
        "missing PNG signature"
    );
    let decoder = png::Decoder::new(bytes);
    let mut reader = decoder.read_info().expect("PNG header decodes");
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).expect("PNG frame decodes");
    assert_eq!((info.width, info.height), size);
    assert_eq!(info.color_type, png::ColorType::Rgb);
    let colours: BTreeSet<&[u8]> = buf[..info.buffer_size()].chunks_exact(3).collect();
    // Antialiased text and lines give hundreds of shades; a blank or
    // nearly blank canvas gives a handful.
    assert!(
        colours.len() > 50,
        "only {} distinct colours",
        colours.len()
    );
}

/// Asserts that `bytes` is SVG text containing every string of `needles`.
pub(crate) fn check_svg(bytes: &[u8], needles: &[&str]) {
    let text = std::str::from_utf8(bytes).expect("SVG is UTF-8");
    assert!(
        text.trim_start().starts_with("<svg"),
        "does not start with <svg"
    );
    assert!(
        text.trim_end().ends_with("</svg>"),
        "does not end with </svg>"
    );
    for needle in needles {
        assert!(text.contains(needle), "SVG lacks {needle:?}");
    }
}

/// Writes `bytes` to `$TAUMAP_PLOT_PREVIEW_DIR/{file}` when that variable
/// is set, so the rendered figures can be inspected by eye.
pub(crate) fn save(file: &str, bytes: &[u8]) {
    if let Some(dir) = std::env::var_os("TAUMAP_PLOT_PREVIEW_DIR") {
        let dir = std::path::PathBuf::from(dir);
        std::fs::create_dir_all(&dir).expect("preview directory can be created");
        std::fs::write(dir.join(file), bytes).expect("preview can be written");
    }
}

/// Impedance of one RC element, R = 50 ohm, C = 20 µF, at 30 frequencies
/// from 0.1 Hz to 100 kHz: Z = R / (1 + jωRC) (analytic).
pub(crate) fn rc_arc() -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let (r, c) = (50.0, 20e-6);
    let f: Vec<f64> = (0..30)
        .map(|i| 10f64.powf(-1.0 + 6.0 * i as f64 / 29.0))
        .collect();
    let (mut re, mut im) = (Vec::new(), Vec::new());
    for &fi in &f {
        let x = 2.0 * std::f64::consts::PI * fi * r * c;
        let d = 1.0 + x * x;
        re.push(r / d);
        im.push(-r * x / d);
    }
    (f, re, im)
}
