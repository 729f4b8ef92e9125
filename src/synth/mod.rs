//! Our own synthesiser of invented detector-voltage records (demo and tests), with fixed
//! seeds. SKELETON: the generator trait is the agreed interface.

/// A generator of one channel of detector voltage, block by block, without end.
pub trait Generator: Send {
    /// Sample rate of the generated stream.
    fn sample_rate_hz(&self) -> f64;
    /// Fills `out` with the next samples (volts).
    fn fill(&mut self, out: &mut [f64]);
}

/// Names of the scenarios `stillpoint synth` knows, in help order.
pub const SCENARIOS: &[&str] = &[];

/// A live generator for `scenario` with `seed`, or `None` for an unknown scenario.
/// Used by the acquisition layer for [`crate::acquire::SourceSpec::Demo`].
pub fn generator(scenario: &str, seed: u64) -> Option<Box<dyn Generator>> {
    let _ = (scenario, seed);
    None
}
