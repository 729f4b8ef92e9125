//! How many samples a recording holds before it is read (the window chooses its automatic
//! segment and averaging from it, as the command line does).

use std::path::Path;

use super::{SourceConfig, SourceSpec, WavReader};

/// Samples of the selected channel in a recording whose length is known before reading
/// (a WAV, raw, `.npy` or HDF5 file that is not followed); `None` for streams and the demo.
/// The command line and the window both size their automatic segment from it.
pub fn known_length(config: &SourceConfig) -> Option<u64> {
    let SourceSpec::Path(path) = &config.spec else {
        return None;
    };
    if config.follow {
        return None;
    }
    if config.spec.is_wav() {
        return wav_length(path);
    }
    if config.spec.is_npy() || config.spec.is_hdf5() {
        return super::lab_file_length(config, path);
    }
    let frame_bytes = config.sample_format?.bytes() as u64 * config.channels.max(1) as u64;
    let bytes = std::fs::metadata(path).ok()?.len();
    bytes.checked_div(frame_bytes)
}

/// Frames of a WAV file per its header, capped by what the file actually holds.
fn wav_length(path: &Path) -> Option<u64> {
    let header = WavReader::open(path, 0, 1.0, None).ok()?.header();
    let frame_bytes = header.frame_bytes() as u64;
    let file_bytes = std::fs::metadata(path).ok()?.len();
    let present = file_bytes.saturating_sub(header.data_offset);
    let bytes = header
        .data_bytes_declared
        .map_or(present, |d| d.min(present));
    bytes.checked_div(frame_bytes)
}
