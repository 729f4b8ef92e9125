//! Writing a scenario to a WAV file plus its `.truth.json` sidecar, atomically: each file is
//! written to a temporary file in the same folder, flushed, fsynced and renamed over the
//! target only when complete, so a failed run never replaces an existing file.

use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use super::{Result, ScenarioConfig, SynthError, Truth, WavFormat};
use crate::io::atomic::{AtomicError, write_atomic};

/// Samples generated per block while writing.
const BLOCK_SAMPLES: usize = 1 << 16;

/// The truth sidecar of a WAV path: `OUT.wav` → `OUT.truth.json` (a path without a `.wav`
/// extension gets `.truth.json` appended to its full name).
pub fn truth_path(wav_path: &Path) -> PathBuf {
    let is_wav = wav_path
        .extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case("wav"));
    let base = if is_wav {
        wav_path.with_extension("")
    } else {
        wav_path.to_path_buf()
    };
    let mut name = base.into_os_string();
    name.push(".truth.json");
    PathBuf::from(name)
}

fn io_error(path: &Path, e: AtomicError<SynthError>) -> SynthError {
    match e {
        AtomicError::Io(source) => SynthError::Io {
            path: path.to_path_buf(),
            source,
        },
        AtomicError::Inner(inner) => inner,
    }
}

/// Writes `config` (its `duration_secs` of samples at `sample_rate_hz`, in `format`) to
/// `path` and the truth to [`truth_path`]`(path)`; replaces existing files only on success.
///
/// # Errors
/// An invalid configuration, a non-integer or too high sample rate, a record too long for a
/// WAV (4 GiB), clipping of an integer format ([`SynthError::Clipped`]) or an I/O error.
pub fn write_wav(config: &ScenarioConfig, path: &Path) -> Result<Truth> {
    let truth = config.truth()?;
    let fs = config.sample_rate_hz;
    if fs.fract() != 0.0 || fs > f64::from(u32::MAX) {
        return Err(SynthError::Parameter(format!(
            "a WAV needs an integer sample rate below 2^32 Hz, got {fs}"
        )));
    }
    let n = config.sample_count();
    let bytes_per_sample: u64 = match config.format {
        WavFormat::F32 => 4,
        WavFormat::I16 => 2,
        WavFormat::I24 => 3,
    };
    if n == 0 {
        return Err(SynthError::Parameter(
            "the record would hold no samples; raise duration_secs".to_string(),
        ));
    }
    if n.saturating_mul(bytes_per_sample) > u64::from(u32::MAX) - 1024 {
        return Err(SynthError::Parameter(format!(
            "{n} samples of {} do not fit in a WAV file (4 GiB); shorten duration_secs",
            config.format.name()
        )));
    }
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: fs as u32,
        bits_per_sample: match config.format {
            WavFormat::F32 => 32,
            WavFormat::I16 => 16,
            WavFormat::I24 => 24,
        },
        sample_format: match config.format {
            WavFormat::F32 => hound::SampleFormat::Float,
            _ => hound::SampleFormat::Int,
        },
    };
    let mut generator = config.build()?;
    write_atomic(path, true, |file: &mut BufWriter<File>| {
        let wav_error = |e: hound::Error| SynthError::Wav {
            path: path.to_path_buf(),
            message: e.to_string(),
        };
        let mut writer = hound::WavWriter::new(file, spec).map_err(wav_error)?;
        let mut block = vec![0.0; BLOCK_SAMPLES];
        let mut left = n;
        let mut clipped = 0_u64;
        let mut max_abs = 0.0_f64;
        let scale = match config.format {
            WavFormat::F32 => 1.0,
            WavFormat::I16 => 32_768.0,
            WavFormat::I24 => 8_388_608.0,
        };
        while left > 0 {
            let len = usize::try_from(left.min(BLOCK_SAMPLES as u64)).unwrap_or(BLOCK_SAMPLES);
            let chunk = block.get_mut(..len).unwrap_or_default();
            generator.fill(chunk);
            for &v in chunk.iter() {
                max_abs = max_abs.max(v.abs());
                match config.format {
                    WavFormat::F32 => writer.write_sample(v as f32).map_err(wav_error)?,
                    _ => {
                        let counts = (v * scale).round();
                        if counts > scale - 1.0 || counts < -scale {
                            clipped += 1;
                        }
                        let c = counts.clamp(-scale, scale - 1.0) as i32;
                        writer.write_sample(c).map_err(wav_error)?;
                    }
                }
            }
            left -= len as u64;
        }
        if clipped > 0 {
            return Err(SynthError::Clipped {
                format: config.format.name(),
                samples: clipped,
                max_abs_v: max_abs,
            });
        }
        writer.finalize().map_err(wav_error)?;
        Ok(())
    })
    .map_err(|e| io_error(path, e))?;
    let json_path = truth_path(path);
    let text = serde_json::to_string_pretty(&truth).map_err(|e| SynthError::Io {
        path: json_path.clone(),
        source: std::io::Error::other(e),
    })?;
    write_atomic(&json_path, true, |file: &mut BufWriter<File>| {
        file.write_all(text.as_bytes())
            .and_then(|()| file.write_all(b"\n"))
            .map_err(|e| SynthError::Io {
                path: json_path.clone(),
                source: e,
            })
    })
    .map_err(|e| io_error(&json_path, e))?;
    Ok(truth)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn truth_path_rules() {
        assert_eq!(
            truth_path(Path::new("a/thermal.wav")),
            PathBuf::from("a/thermal.truth.json")
        );
        assert_eq!(
            truth_path(Path::new("x.WAV")),
            PathBuf::from("x.truth.json")
        );
        assert_eq!(
            truth_path(Path::new("rec.raw")),
            PathBuf::from("rec.raw.truth.json")
        );
    }
}
