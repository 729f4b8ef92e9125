//! The default segment length, one rule for both faces: the command line's `spectrum` and
//! `analyze` and the window's automatic segment on a recording.

/// Segment length when none is given and the record is long enough (2¹⁶ samples).
pub const DEFAULT_SEGMENT: usize = 1 << 16;

/// The default segment: [`DEFAULT_SEGMENT`], or the largest power of two ≤ L/8 when the
/// record length L is known and shorter (never below 2), so a short record still averages
/// about eight segments.
pub fn default_segment(record_samples: Option<u64>) -> usize {
    match record_samples {
        Some(len) if len / 8 < DEFAULT_SEGMENT as u64 => {
            let eighth = (len / 8).max(2);
            let pow = 1u64 << (63 - eighth.leading_zeros());
            usize::try_from(pow).unwrap_or(DEFAULT_SEGMENT)
        }
        _ => DEFAULT_SEGMENT,
    }
}
