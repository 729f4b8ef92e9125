//! File I/O shared by the headless commands, the window and the synthesiser: atomic writes
//! ([`atomic`]: temporary file, fsync, rename) and the FNV-1a hash that snapshots use to tie
//! their two files together and atomic writes use to shorten long temporary names.

pub mod atomic;

/// FNV-1a, 64 bit (Fowler–Noll–Vo; offset basis 0xcbf29ce484222325, prime 0x100000001b3).
pub(crate) fn fnv1a64(bytes: &[u8]) -> u64 {
    bytes.iter().fold(0xcbf2_9ce4_8422_2325, |h, &b| {
        (h ^ u64::from(b)).wrapping_mul(0x0000_0100_0000_01b3)
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fnv_reference_values() {
        // FNV-1a 64 test vectors (Fowler/Noll/Vo reference list; checked with Python here).
        assert_eq!(fnv1a64(b""), 0xcbf2_9ce4_8422_2325);
        assert_eq!(fnv1a64(b"a"), 0xaf63_dc4c_8601_ec8c);
        assert_eq!(fnv1a64(b"foobar"), 0x8594_4171_f739_67e8);
    }
}
