//! Fuzz target: arbitrary bytes through the WAV header parser and data decoder.
//! Property: never panics; delivers at most one sample per two input bytes.
#![no_main]

use std::io::Cursor;

use libfuzzer_sys::fuzz_target;
use stillpoint::acquire::{SampleReader, WavReader};

fuzz_target!(|data: &[u8]| {
    let len = data.len();
    // The first byte picks the channel so channel selection is exercised too.
    let channel = usize::from(data.first().copied().unwrap_or(0) % 4);
    for channel in [0, channel] {
        let Ok(mut reader) = WavReader::new(Cursor::new(data.to_vec()), channel, 1.0, None) else {
            continue;
        };
        let mut out = [0.0_f64; 64];
        let mut total = 0_usize;
        while let Ok(n) = reader.read_block(&mut out) {
            if n == 0 {
                break;
            }
            total += n;
        }
        assert!(total * 2 <= len);
        let _ = reader.describe();
        let _ = reader.stats();
    }
});
