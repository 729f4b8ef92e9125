//! The median, numpy's way (`numpy.median`): the middle value of an odd count, the mean of
//! the two middle values of an even count. One helper for the fits' robust floors and the
//! median-averaged Welch estimate.

/// Median of `values`, reordering them in place (O(n) selection, no full sort); `None` for
/// an empty slice. NaN sorts above every number (`f64::total_cmp`), so filter it out first.
pub fn median(values: &mut [f64]) -> Option<f64> {
    let m = values.len();
    if m == 0 {
        return None;
    }
    let (left, upper, _) = values.select_nth_unstable_by(m / 2, f64::total_cmp);
    let upper = *upper;
    if !m.is_multiple_of(2) {
        return Some(upper);
    }
    // The lower middle value is the largest of the left part.
    let lower = left.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    Some((lower + upper) / 2.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn odd_even_and_empty_as_numpy() {
        // numpy.median([3, 1, 2]) = 2.0, numpy.median([4, 1, 2, 3]) = 2.5.
        assert_eq!(median(&mut [3.0, 1.0, 2.0]), Some(2.0));
        assert_eq!(median(&mut [4.0, 1.0, 2.0, 3.0]), Some(2.5));
        assert_eq!(median(&mut [-1.0, 7.0]), Some(3.0));
        assert_eq!(median(&mut []), None);
    }
}
