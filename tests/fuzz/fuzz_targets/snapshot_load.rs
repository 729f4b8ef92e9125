//! Fuzz target: arbitrary bytes through the snapshot loader (metadata JSON + spectrum CSV)
//! and the spectrum CSV reader. Property: never panics; every error is one line; a loaded
//! snapshot holds only finite values on the grid its metadata states.
#![no_main]

use libfuzzer_sys::fuzz_target;
use stillpoint::snapshot::{from_bytes, read_spectrum_csv};

fuzz_target!(|data: &[u8]| {
    // Split at the first NUL: metadata before, data after (no NUL: the same bytes for both).
    let (json, csv) = match data.iter().position(|b| *b == 0) {
        Some(i) => (&data[..i], &data[i + 1..]),
        None => (data, data),
    };
    match from_bytes(json, csv) {
        Ok(s) => {
            assert_eq!(s.spectrum.len(), s.meta.bins);
            assert!(s.spectrum.psd_v2_per_hz.iter().all(|p| p.is_finite()));
        }
        Err(e) => assert!(!e.to_string().contains('\n')),
    }
    if let Err(e) = read_spectrum_csv(csv) {
        assert!(!e.to_string().contains('\n'));
    }
});
