//! Physics of a mechanical mode read out as displacement (METHODS.md §2–§6): constants,
//! the damped-oscillator model, quantum references, occupancy, calibration, the mode fit,
//! sideband thermometry and the stray-resonance finder. SKELETON.

pub mod constants;
