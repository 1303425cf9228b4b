//! Arbitrary bytes into the transient reader, read as a voltage and as a
//! current record with the default binning: it returns binned samples or an
//! error, never panics, hangs or exhausts memory.

#![no_main]

use libfuzzer_sys::fuzz_target;
use std::path::Path;
use taumap::io::transient::{Quantity, parse_transient};
use taumap::pipeline::binning::{BinOptions, MIN_BINS};

fuzz_target!(|data: &[u8]| {
    let opts = BinOptions::default();
    for quantity in [Quantity::Voltage, Quantity::Current] {
        if let Ok(binned) = parse_transient(data, Path::new("fuzz.csv"), quantity, &opts) {
            // What the reader promises about its output (src/io/transient.rs,
            // src/pipeline/binning.rs).
            assert!(binned.bins.len() >= MIN_BINS);
            assert!(
                binned
                    .bins
                    .windows(2)
                    .all(|w| w[0].time_s > 0.0 && w[0].time_s < w[1].time_s),
                "bin times not positive and ascending"
            );
            let counted: usize = binned.bins.iter().map(|b| b.count).sum();
            assert_eq!(counted, binned.response_samples);
        }
    }
});
