//! Display units of spectral densities and integrated rms. SKELETON.

/// A unit in which a spectral density is shown or written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
pub enum DensityUnit {
    /// Power spectral density of the detector voltage, V²/Hz.
    #[default]
    V2PerHz,
    /// Amplitude spectral density, V/√Hz.
    VPerRtHz,
    /// Calibrated displacement PSD, m²/Hz.
    M2PerHz,
    /// Calibrated displacement ASD, m/√Hz.
    MPerRtHz,
    /// 10·log10 of the PSD in V²/Hz (dB re 1 V²/Hz).
    DbV2PerHz,
    /// 10·log10 of the PSD in m²/Hz (dB re 1 m²/Hz).
    DbM2PerHz,
}
