//! Snapshots as the window holds them: a saved spectrum loaded for overlay and comparison,
//! with its stray resonances (the reference list for "new since snapshot"). Files are read and written by
//! [`crate::snapshot`] (JSON metadata + CSV data, atomic writes).

use std::path::{Path, PathBuf};

use crate::dsp::Spectrum;
use crate::report::{PeakReport, Report};

/// A snapshot loaded into the window.
#[derive(Debug, Clone, PartialEq)]
pub struct LoadedSnapshot {
    /// Short name (file stem, or the label saved with it).
    pub name: String,
    /// Where it was loaded from.
    pub path: PathBuf,
    /// Bin frequencies, Hz.
    pub frequencies_hz: Vec<f64>,
    /// The saved spectrum (PSD in V²/Hz and its settings).
    pub spectrum: Spectrum,
    /// log10 of its PSD in V²/Hz (NaN where not positive), computed once at load so the
    /// window only decimates and maps it (as the live trace's `Frame::log_psd`); shared, so
    /// the window's plot caches can tell this snapshot's data apart from any other.
    pub log_psd: std::sync::Arc<Vec<f64>>,
    /// Min/max blocks of `log_psd` (for the plot's decimation).
    pub log_psd_blocks: std::sync::Arc<super::MinMaxBlocks>,
    /// Calibration saved with it, m/V.
    pub m_per_v: Option<f64>,
    /// Stray resonances found in it (the reference list for "new since snapshot").
    pub peaks: Vec<PeakReport>,
    /// Drawn over the live trace.
    pub visible: bool,
}

/// Saves `spectrum` (with its analysis and the settings that made it) as a snapshot at
/// `path` (JSON metadata; the CSV data beside it) through [`crate::snapshot::save`].
///
/// # Errors
/// A one-line message: the file exists and `overwrite` is false, or it cannot be written.
pub fn save(
    path: &Path,
    spectrum: &Spectrum,
    report: Option<&Report>,
    source: &crate::acquire::SourceConfig,
    label: &str,
    overwrite: bool,
) -> Result<LoadedSnapshot, String> {
    let calibration = report.and_then(|r| {
        let m = r
            .calibration
            .m_per_v
            .filter(|m| m.is_finite() && *m > 0.0)?;
        Some(crate::snapshot::SnapshotCalibration {
            m_per_v: m,
            method: r
                .calibration
                .method
                .clone()
                .unwrap_or_else(|| "given".into()),
            m_per_v_uncertainty: r.calibration.m_per_v_uncertainty,
        })
    });
    let info = crate::snapshot::SnapshotInfo {
        label: label.to_string(),
        notes: String::new(),
        source: source_name(source),
        calibration,
        report: report.cloned(),
    };
    let saved =
        crate::snapshot::save(path, spectrum, &info, overwrite).map_err(|e| e.to_string())?;
    Ok(from_snapshot(saved))
}

/// Loads the snapshot at `path` (`NAME`, `NAME.json` or `NAME.csv`) for overlay.
///
/// # Errors
/// A one-line message saying what is wrong with the file.
pub fn load(path: &Path) -> Result<LoadedSnapshot, String> {
    crate::snapshot::load(path)
        .map(from_snapshot)
        .map_err(|e| e.to_string())
}

fn from_snapshot(s: crate::snapshot::Snapshot) -> LoadedSnapshot {
    let name = if s.meta.label.trim().is_empty() {
        s.path.file_stem().map_or_else(
            || "snapshot".to_string(),
            |n| n.to_string_lossy().into_owned(),
        )
    } else {
        s.meta.label.clone()
    };
    let log_psd: Vec<f64> = s
        .spectrum
        .psd_v2_per_hz
        .iter()
        .map(|&p| if p > 0.0 { p.log10() } else { f64::NAN })
        .collect();
    LoadedSnapshot {
        log_psd_blocks: std::sync::Arc::new(super::MinMaxBlocks::new(&log_psd)),
        log_psd: std::sync::Arc::new(log_psd),
        name,
        frequencies_hz: s.spectrum.frequencies_hz(),
        m_per_v: s.meta.calibration.as_ref().map(|c| c.m_per_v),
        peaks: s
            .meta
            .report
            .as_ref()
            .map(|r| r.peaks.clone())
            .unwrap_or_default(),
        spectrum: s.spectrum,
        path: s.path,
        visible: true,
    }
}

/// How a source is described in a snapshot's metadata.
pub(crate) fn source_name(source: &crate::acquire::SourceConfig) -> String {
    use crate::acquire::SourceSpec;
    match &source.spec {
        SourceSpec::Path(p) => p.display().to_string(),
        SourceSpec::Stdin => "stdin".into(),
        SourceSpec::Tcp(a) => format!("tcp://{a}"),
        SourceSpec::Demo { scenario, seed } => format!("demo:{scenario} seed {seed}"),
    }
}
