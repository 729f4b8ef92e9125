//! Fuzz target: arbitrary bytes through the raw decoder with a layout taken from the first
//! bytes. Property: never panics; whole frames delivered, the rest counted as partial.
#![no_main]

use std::io::Cursor;

use libfuzzer_sys::fuzz_target;
use stillpoint::acquire::{Endian, RawFormat, RawReader, SampleFormat, SampleReader};

const FORMATS: [SampleFormat; 5] = [
    SampleFormat::I16,
    SampleFormat::I24,
    SampleFormat::I32,
    SampleFormat::F32,
    SampleFormat::F64,
];

fuzz_target!(|data: &[u8]| {
    let [a, b, rest @ ..] = data else {
        return;
    };
    let sample_format = FORMATS[usize::from(*a % 5)];
    let endian = if a & 0x80 == 0 {
        Endian::Little
    } else {
        Endian::Big
    };
    let channels = usize::from(b % 8) + 1;
    let channel = usize::from(b >> 4) % channels;
    let format = RawFormat {
        sample_format,
        endian,
        channels,
        channel,
        sample_rate_hz: 1.0,
        volts_per_unit: 1.0,
    };
    let Ok(mut reader) = RawReader::new(Cursor::new(rest.to_vec()), format) else {
        panic!("a valid layout was refused");
    };
    let mut out = [0.0_f64; 37];
    let mut total = 0_usize;
    loop {
        let n = reader
            .read_block(&mut out)
            .expect("reading from memory cannot fail");
        if n == 0 {
            break;
        }
        total += n;
    }
    let frame = channels * sample_format.bytes();
    assert_eq!(total, rest.len() / frame);
    assert_eq!(
        reader.stats().partial_frame_bytes as usize,
        rest.len() % frame
    );
});
