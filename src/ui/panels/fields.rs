//! The edit fields read back into checked settings (source, Welch, calibration and mode);
//! each error is one line naming the field by its label.

use super::PanelState;
use crate::acquire::{SourceConfig, SourceSpec};
use crate::analysis::AnalysisOptions;
use crate::model::{CalibrationMethod, WelchSettings};

/// Parses a positive finite number; `name` goes into the error.
fn parse_pos(text: &str, name: &str) -> Result<f64, String> {
    let v: f64 = text
        .trim()
        .parse()
        .map_err(|_| format!("{name}: '{}' is not a number", text.trim()))?;
    if v.is_finite() && v > 0.0 {
        Ok(v)
    } else {
        Err(format!("{name} must be a positive number, got {v}"))
    }
}

/// A finite number ≠ 0 (either sign).
fn parse_nonzero(text: &str, name: &str) -> Result<f64, String> {
    let v: f64 = text
        .trim()
        .parse()
        .map_err(|_| format!("{name}: '{}' is not a number", text.trim()))?;
    if v.is_finite() && v != 0.0 {
        Ok(v)
    } else {
        Err(format!("{name} must be a non-zero number, got {v}"))
    }
}

/// Empty: `None` (taken as exact); else a finite number ≥ 0.
fn parse_opt_non_negative(text: &str, name: &str) -> Result<Option<f64>, String> {
    if text.trim().is_empty() {
        return Ok(None);
    }
    let v: f64 = text
        .trim()
        .parse()
        .map_err(|_| format!("{name}: '{}' is not a number", text.trim()))?;
    if v.is_finite() && v >= 0.0 {
        Ok(Some(v))
    } else {
        Err(format!("{name} must be 0 or a positive number, got {v}"))
    }
}

fn parse_opt_pos(text: &str, name: &str) -> Result<Option<f64>, String> {
    if text.trim().is_empty() {
        Ok(None)
    } else {
        parse_pos(text, name).map(Some)
    }
}

impl PanelState {
    /// The Welch settings being edited, checked.
    ///
    /// # Errors
    /// A one-line message naming the bad field.
    pub fn welch_settings(&self) -> Result<WelchSettings, String> {
        let mut w = self.welch.clone();
        w.max_averages = if self.max_averages_text.trim().is_empty() {
            None
        } else {
            Some(
                self.max_averages_text
                    .trim()
                    .parse::<usize>()
                    .ok()
                    .filter(|k| *k >= 1)
                    .ok_or_else(|| {
                        format!(
                            "averages: '{}' is not a whole number ≥ 1",
                            self.max_averages_text.trim()
                        )
                    })?,
            )
        };
        if !w.segment_auto && (w.segment < 16 || w.segment > (1 << 24)) {
            return Err(format!(
                "segment must be 16 … 16777216 samples, got {}",
                w.segment
            ));
        }
        if !(0.0..0.95).contains(&w.overlap) {
            return Err(format!("overlap must be 0 … 0.95, got {}", w.overlap));
        }
        Ok(w)
    }

    /// The analysis options being edited, checked, and whether the band follows the mode.
    /// Starts from `current`, so options the panel has no field for (imbalance tones, the
    /// reference peaks) pass through unchanged.
    ///
    /// # Errors
    /// A one-line message naming the bad field by its label.
    pub fn analysis_options(
        &self,
        current: &AnalysisOptions,
    ) -> Result<(AnalysisOptions, bool), String> {
        let mut c = current.clone();
        c.m_per_v = None;
        c.tone_frequency_hz = None;
        c.tone_rms_m = None;
        c.pm_depth_rad = None;
        c.freq_pull_hz_per_m = None;
        match self.method {
            CalibrationMethod::None => {}
            CalibrationMethod::Given => c.m_per_v = Some(parse_pos(&self.m_per_v, "m/V")?),
            CalibrationMethod::ToneDisplacement => {
                c.tone_frequency_hz = Some(parse_pos(&self.tone_freq, "tone frequency")?);
                c.tone_rms_m = Some(parse_pos(&self.tone_rms, "tone rms")?);
            }
            CalibrationMethod::TonePhaseModulation => {
                c.tone_frequency_hz = Some(parse_pos(&self.tone_freq, "tone frequency")?);
                c.pm_depth_rad = Some(parse_pos(&self.pm_depth, "depth β")?);
                // G is often quoted signed; only |G| enters (physics::calibration).
                c.freq_pull_hz_per_m = Some(parse_nonzero(&self.pull, "pull G/2π")?);
            }
            CalibrationMethod::Equipartition => {
                if self.mass.trim().is_empty() {
                    return Err("equipartition needs the effective mass (kg)".into());
                }
                if self.bath_t.trim().is_empty() {
                    return Err("equipartition needs the bath T (K)".into());
                }
            }
        }
        c.bath_temperature_k = parse_opt_pos(&self.bath_t, "bath T")?;
        c.bath_temperature_uncertainty_k = parse_opt_non_negative(&self.bath_t_sigma, "bath T 1σ")?;
        c.mass_kg = parse_opt_pos(&self.mass, "effective mass")?;
        c.mass_uncertainty_kg = parse_opt_non_negative(&self.mass_sigma, "mass 1σ")?;
        let lo = parse_opt_pos(&self.band_lo, "band low")?;
        let hi = parse_opt_pos(&self.band_hi, "band high")?;
        c.mode_band_hz = match (lo, hi) {
            (Some(a), Some(b)) if b > a => Some((a, b)),
            (Some(a), Some(b)) => {
                return Err(format!(
                    "fit band: band low {a} Hz must be below band high {b} Hz"
                ));
            }
            (None, None) => None,
            _ => return Err("fit band: give band low and band high, or neither".into()),
        };
        c.carrier_hz = parse_opt_pos(&self.carrier, "carrier")?;
        c.lo_above = c.carrier_hz.and(self.lo_above);
        c.sideband_imbalance = if c.carrier_hz.is_some() {
            parse_opt_pos(&self.imbalance, "imbalance η_r/η_b")?
        } else {
            current.sideband_imbalance
        };
        let t: f64 = self
            .threshold
            .trim()
            .parse()
            .map_err(|_| format!("peak threshold: '{}' is not a number", self.threshold))?;
        if !(t.is_finite() && t > 0.0) {
            return Err("peak threshold must be a positive number of dB".into());
        }
        // The default (10 dB when none is given) is not turned into a given value.
        if Some(t) != current.peak_threshold_db.or(Some(10.0)) {
            c.peak_threshold_db = Some(t);
        }
        c.sloped_background = self.sloped_background;
        Ok((c, self.follow_mode))
    }

    /// The source being edited, checked.
    ///
    /// # Errors
    /// A one-line message naming the bad field.
    pub fn source_config(&self) -> Result<SourceConfig, String> {
        let text = self.source_path.trim();
        if text.is_empty() {
            return Err("type a file path, '-' for standard input or tcp://HOST:PORT".into());
        }
        let spec = SourceSpec::parse(text);
        let mut c = SourceConfig::new(spec);
        c.follow = self.follow;
        c.volts_per_unit = parse_pos(&self.volts_per_unit_text, "volts per unit")?;
        if !c.spec.is_wav() {
            c.sample_format = Some(
                self.sample_format
                    .ok_or("a raw source needs a sample format (i16, i24, i32, f32, f64)")?,
            );
            c.rate_hz = Some(parse_pos(&self.rate_text, "sample rate")?);
            c.endian = self.endian;
        } else {
            c.rate_hz = parse_opt_pos(&self.rate_text, "sample rate")?;
        }
        if self.channels == 0 || self.channel >= self.channels.max(1) && !c.spec.is_wav() {
            return Err(format!(
                "channel {} does not exist in a stream of {} channels",
                self.channel, self.channels
            ));
        }
        c.channels = self.channels.max(1);
        c.channel = self.channel;
        let second = self.cross_channel_text.trim();
        if !second.is_empty() {
            let j: usize = second.parse().map_err(|_| {
                format!("second detector: '{second}' is not a channel number (0, 1, …)")
            })?;
            if j == self.channel {
                return Err(format!(
                    "second detector: channel {j} is already the first detector's channel"
                ));
            }
            if !c.spec.is_wav() && j >= c.channels {
                return Err(format!(
                    "second detector: channel {j} does not exist in a stream of {} channels",
                    c.channels
                ));
            }
            c.cross_channel = Some(j);
        }
        Ok(c)
    }
}
