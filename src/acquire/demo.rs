//! The built-in demo source: a [`crate::synth`] generator as a [`SampleReader`].
//!
//! The generator produces samples as fast as it is asked; like a recording it is paced at
//! real time by the acquisition thread ([`SampleReader::is_live`] is false), so the window
//! shows an invented cooldown unfolding at its own speed. It never ends.

use super::{AcquireError, ReaderStats, Result, SampleReader};
use crate::synth::{self, Generator};

/// A synthesised scenario as a never-ending source of volts.
pub struct DemoReader {
    generator: Box<dyn Generator>,
    volts_per_unit: f64,
    stats: ReaderStats,
    sample_rate_hz: f64,
    description: String,
}

impl DemoReader {
    /// The generator for `scenario` with `seed`, its output multiplied by `volts_per_unit`.
    ///
    /// # Errors
    /// [`AcquireError::Config`] for an unknown scenario (listing the known ones) or a generator
    /// whose sample rate is not a positive finite number.
    pub fn new(scenario: &str, seed: u64, volts_per_unit: f64) -> Result<Self> {
        let generator = synth::generator(scenario, seed).ok_or_else(|| {
            let known = if synth::SCENARIOS.is_empty() {
                "none are built in".to_string()
            } else {
                format!("known: {}", synth::SCENARIOS.join(", "))
            };
            AcquireError::Config(format!("unknown demo scenario '{scenario}' ({known})"))
        })?;
        Self::from_generator(
            generator,
            volts_per_unit,
            format!("demo '{scenario}' (seed {seed})"),
        )
    }

    /// Wraps any generator (tests, custom scenarios).
    ///
    /// # Errors
    /// [`AcquireError::Config`] if the generator's rate is not a positive finite number.
    pub(crate) fn from_generator(
        generator: Box<dyn Generator>,
        volts_per_unit: f64,
        name: String,
    ) -> Result<Self> {
        let sample_rate_hz = generator.sample_rate_hz();
        super::check_rate(Some(sample_rate_hz))?;
        super::check_volts_per_unit(volts_per_unit)?;
        Ok(Self {
            generator,
            volts_per_unit,
            stats: ReaderStats::default(),
            sample_rate_hz,
            description: format!("{name}, {}", super::format_rate(sample_rate_hz)),
        })
    }
}

impl SampleReader for DemoReader {
    fn sample_rate_hz(&self) -> f64 {
        self.sample_rate_hz
    }

    fn read_block(&mut self, out: &mut [f64]) -> Result<usize> {
        self.generator.fill(out);
        if self.volts_per_unit != 1.0 {
            for v in out.iter_mut() {
                *v *= self.volts_per_unit;
            }
        }
        self.stats.samples += out.len() as u64;
        self.stats.non_finite_samples += out.iter().filter(|v| !v.is_finite()).count() as u64;
        Ok(out.len())
    }

    fn stats(&self) -> ReaderStats {
        self.stats
    }

    fn describe(&self) -> String {
        self.description.clone()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    struct Ramp(f64);

    impl Generator for Ramp {
        fn sample_rate_hz(&self) -> f64 {
            100.0
        }
        fn fill(&mut self, out: &mut [f64]) {
            for v in out {
                self.0 += 1.0;
                *v = self.0;
            }
        }
    }

    #[test]
    fn wraps_a_generator_with_scaling() {
        let mut r = DemoReader::from_generator(Box::new(Ramp(0.0)), 2.0, "ramp".into()).unwrap();
        let mut out = [0.0; 3];
        assert_eq!(r.read_block(&mut out).unwrap(), 3);
        assert_eq!(out, [2.0, 4.0, 6.0]);
        assert_eq!(r.stats().samples, 3);
        assert!(r.describe().starts_with("ramp, 100 Hz"), "{}", r.describe());
    }

    #[test]
    fn unknown_scenario_is_a_clear_error() {
        let e = DemoReader::new("no-such-scenario", 1, 1.0)
            .err()
            .unwrap()
            .to_string();
        assert!(
            e.contains("unknown demo scenario 'no-such-scenario'"),
            "{e}"
        );
    }
}
