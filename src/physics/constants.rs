//! CODATA 2018 / SI 2019 exact constants (Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021)).

/// Planck constant h, J s (exact).
pub(crate) const PLANCK_J_S: f64 = 6.626_070_15e-34;
/// Reduced Planck constant ħ = h/2π, J s.
pub const HBAR_J_S: f64 = PLANCK_J_S / (2.0 * std::f64::consts::PI);
/// Boltzmann constant k_B, J/K (exact).
pub const BOLTZMANN_J_PER_K: f64 = 1.380_649e-23;
