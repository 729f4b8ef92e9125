//! Exact discrete-time simulation of a damped harmonic oscillator driven by white thermal
//! force (a two-dimensional Ornstein–Uhlenbeck process), after Nørrelykke & Flyvbjerg,
//! "Harmonic oscillator in heat bath: exact simulation of time-lapse-recorded data and exact
//! analytical benchmark statistics", Phys. Rev. E 83, 041103 (2011) (from memory; the formulas
//! below are derived here and unit-tested against a numerical integral).
//!
//! Model (METHODS.md §2): `m ẍ + m Γ ẋ + m Ω₀² x = F(t)`, with white force of single-sided
//! density `S_FF = 4 k_B T m Γ`, i.e. `⟨F(t)F(t')⟩ = 2 m Γ k_B T δ(t − t')`. In state form
//! `s = (x, v)`: `ds = A s dt + b dW` with `A = [[0, 1], [−Ω₀², −Γ]]`, `b = (0, √(2Γσ_v²))`.
//! The stationary covariance is `Σ = diag(σ_x², σ_v²)` with `σ_v² = Ω₀² σ_x²`, and
//! `σ_x² = k_BT/(mΩ₀²)` (equipartition) or, quantum-mechanically, `x_zpf² (2n̄+1)` — the
//! caller chooses the variance, the dynamics do not care.
//!
//! Exact update over one sample interval h: `s(t+h) = Φ s(t) + ξ`, `Φ = e^{Ah}`, and ξ Gaussian
//! with covariance `Q = Σ − Φ Σ Φᵀ` (the stationary covariance must be preserved, and the
//! integral `∫₀ʰ e^{Au} b bᵀ e^{Aᵀu} du` equals exactly that for a stable A). With
//! `a = Γ/2`, `ω₁ = √(Ω₀² − a²)` (under-damped, Q > ½), `s = sin ω₁h`, `c = cos ω₁h`,
//! `E = e^{−Γh}`:
//!
//! ```text
//! Φ = e^{−ah} [[c + (a/ω₁) s,   s/ω₁          ],
//!              [−(Ω₀²/ω₁) s,    c − (a/ω₁) s  ]]
//! Q₁₁ = σ_x² [(1 − E) − E (2as/ω₁)(as/ω₁ + c)]
//! Q₂₂ = σ_v² [(1 − E) − E (2as/ω₁)(as/ω₁ − c)]
//! Q₁₂ = 2a E σ_v² s²/ω₁²
//! ```
//!
//! (expand `Φ Σ Φᵀ` using `Ω₀² = ω₁² + a²`; `1 − E` is computed with `expm1` so that high-Q
//! modes keep their precision). ξ is drawn as `L g` with L the Cholesky factor of Q.
//! No discretisation error: the sampled process has exactly the autocovariance of the
//! continuous one at the sample times, whatever h.

use super::{Result, SynthError, rng::Rng};

/// Parameters of one oscillator: undamped frequency, FWHM linewidth and stationary variance.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct OscillatorParams {
    /// f₀ = Ω₀/2π (the Ω_m of χ), Hz.
    pub frequency_hz: f64,
    /// γ = Γ/2π, the FWHM of the displacement PSD, Hz.
    pub linewidth_hz: f64,
    /// Stationary variance ⟨x²⟩ in the output unit squared (m² or V²).
    pub variance: f64,
}

impl OscillatorParams {
    /// Checks that the oscillator is under-damped, below Nyquist and has a finite variance.
    ///
    /// # Errors
    /// [`SynthError::Parameter`] naming the bad value.
    pub fn validate(&self, sample_rate_hz: f64) -> Result<()> {
        let f = self.frequency_hz;
        let g = self.linewidth_hz;
        if !(f.is_finite() && f > 0.0 && f < 0.5 * sample_rate_hz) {
            return Err(SynthError::Parameter(format!(
                "oscillator frequency {f} Hz must be positive and below Nyquist ({} Hz)",
                0.5 * sample_rate_hz
            )));
        }
        if !(g.is_finite() && g > 0.0 && g < 2.0 * f) {
            return Err(SynthError::Parameter(format!(
                "linewidth {g} Hz must be positive and below 2 f = {} Hz (Q > 1/2)",
                2.0 * f
            )));
        }
        if !(self.variance.is_finite() && self.variance >= 0.0) {
            return Err(SynthError::Parameter(format!(
                "oscillator variance {} must be finite and non-negative",
                self.variance
            )));
        }
        Ok(())
    }
}

/// Update coefficients for one sample interval.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Step {
    phi: [[f64; 2]; 2],
    l11: f64,
    l21: f64,
    l22: f64,
}

/// Computes Φ and the Cholesky factor of Q (module docs).
fn step_coefficients(p: &OscillatorParams, dt_secs: f64) -> Step {
    let omega0 = std::f64::consts::TAU * p.frequency_hz;
    let gamma = std::f64::consts::TAU * p.linewidth_hz;
    let a = 0.5 * gamma;
    let omega1 = (omega0 * omega0 - a * a).max(0.0).sqrt();
    let (s, c) = (omega1 * dt_secs).sin_cos();
    let decay = (-a * dt_secs).exp();
    let e = (-gamma * dt_secs).exp();
    let one_minus_e = -(-gamma * dt_secs).exp_m1();
    let sx2 = p.variance;
    let sv2 = omega0 * omega0 * sx2;
    let r = if omega1 > 0.0 { s / omega1 } else { dt_secs };
    let phi = [
        [decay * (c + a * r), decay * r],
        [-decay * omega0 * omega0 * r, decay * (c - a * r)],
    ];
    let q11 = (sx2 * (one_minus_e - e * 2.0 * a * r * (a * r + c))).max(0.0);
    let q22 = (sv2 * (one_minus_e - e * 2.0 * a * r * (a * r - c))).max(0.0);
    let q12 = 2.0 * a * e * sv2 * r * r;
    let l11 = q11.sqrt();
    let l21 = if l11 > 0.0 { q12 / l11 } else { 0.0 };
    let l22 = (q22 - l21 * l21).max(0.0).sqrt();
    Step { phi, l11, l21, l22 }
}

/// The noise covariance Q (q11, q12, q22) of one exact step (for the tests).
#[cfg(test)]
fn step_noise_covariance(p: &OscillatorParams, dt_secs: f64) -> (f64, f64, f64) {
    let st = step_coefficients(p, dt_secs);
    (
        st.l11 * st.l11,
        st.l11 * st.l21,
        st.l21 * st.l21 + st.l22 * st.l22,
    )
}

/// The transition matrix Φ = e^{Ah} of one step (for the tests).
#[cfg(test)]
fn step_transition(p: &OscillatorParams, dt_secs: f64) -> [[f64; 2]; 2] {
    step_coefficients(p, dt_secs).phi
}

/// A thermally driven oscillator advanced exactly, one sample at a time.
#[derive(Debug, Clone)]
pub(crate) struct ThermalOscillator {
    params: OscillatorParams,
    dt_secs: f64,
    step: Step,
    x: f64,
    v: f64,
}

impl ThermalOscillator {
    /// An oscillator started in its stationary state (x, v drawn from Σ), so the record has
    /// no start-up transient.
    ///
    /// # Errors
    /// [`SynthError::Parameter`] for invalid parameters or sample rate.
    pub fn new(params: OscillatorParams, sample_rate_hz: f64, rng: &mut Rng) -> Result<Self> {
        if !(sample_rate_hz.is_finite() && sample_rate_hz > 0.0) {
            return Err(SynthError::Parameter(format!(
                "sample rate must be positive, got {sample_rate_hz}"
            )));
        }
        params.validate(sample_rate_hz)?;
        let dt_secs = 1.0 / sample_rate_hz;
        let sx = params.variance.sqrt();
        let omega0 = std::f64::consts::TAU * params.frequency_hz;
        let x = sx * rng.normal();
        let v = omega0 * sx * rng.normal();
        Ok(Self {
            params,
            dt_secs,
            step: step_coefficients(&params, dt_secs),
            x,
            v,
        })
    }

    /// Changes the parameters from now on (slow schedules, e.g. a cooldown); the state is
    /// kept and relaxes towards the new stationary state at the energy damping rate Γ, as a
    /// real mode does when its bath changes.
    ///
    /// # Errors
    /// [`SynthError::Parameter`] for invalid parameters (the old ones stay in force).
    pub(crate) fn set_params(&mut self, params: OscillatorParams) -> Result<()> {
        params.validate(1.0 / self.dt_secs)?;
        self.params = params;
        self.step = step_coefficients(&params, self.dt_secs);
        Ok(())
    }

    /// Returns the current displacement and advances the state by one sample.
    pub(crate) fn next_sample(&mut self, rng: &mut Rng) -> f64 {
        let out = self.x;
        let g1 = rng.normal();
        let g2 = rng.normal();
        let st = &self.step;
        let x = st.phi[0][0] * self.x + st.phi[0][1] * self.v + st.l11 * g1;
        let v = st.phi[1][0] * self.x + st.phi[1][1] * self.v + st.l21 * g1 + st.l22 * g2;
        self.x = x;
        self.v = v;
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn params() -> OscillatorParams {
        OscillatorParams {
            frequency_hz: 86_100.0,
            linewidth_hz: 43.0,
            variance: 2.0,
        }
    }

    /// Q must equal ∫₀ʰ Φ(u) b bᵀ Φ(u)ᵀ du with b = (0, √(2Γσ_v²)): checked by Simpson's rule
    /// on 20 000 sub-intervals (independent of the closed form's algebra).
    #[test]
    fn noise_covariance_matches_integral() {
        for (f, g, fs) in [
            (86_100.0, 43.0, 250_000.0),
            (1_000.0, 300.0, 10_000.0),
            (5.0, 0.5, 3.0),
        ] {
            let p = OscillatorParams {
                frequency_hz: f,
                linewidth_hz: g,
                variance: 1.5,
            };
            let h = 1.0 / fs;
            let gamma = std::f64::consts::TAU * g;
            let omega0 = std::f64::consts::TAU * f;
            let d = 2.0 * gamma * omega0 * omega0 * p.variance;
            let n = 20_000;
            let mut acc = [0.0_f64; 3];
            for i in 0..=n {
                let u = h * i as f64 / n as f64;
                let w = if i == 0 || i == n {
                    1.0
                } else if i % 2 == 1 {
                    4.0
                } else {
                    2.0
                };
                let ph = step_transition(&p, u);
                // Φ b bᵀ Φᵀ with b = (0, √d): column 1 of Φ times √d.
                acc[0] += w * d * ph[0][1] * ph[0][1];
                acc[1] += w * d * ph[0][1] * ph[1][1];
                acc[2] += w * d * ph[1][1] * ph[1][1];
            }
            let scale = h / n as f64 / 3.0;
            let (q11, q12, q22) = step_noise_covariance(&p, h);
            for (got, want) in [(q11, acc[0]), (q12, acc[1]), (q22, acc[2])] {
                let want = want * scale;
                assert!(
                    (got - want).abs() <= 1e-7 * want.abs().max(1e-300),
                    "f={f} g={g}: {got} vs {want}"
                );
            }
        }
    }

    /// Φ must be e^{Ah}: compare with a 40-term Taylor series of the matrix exponential.
    #[test]
    fn transition_is_matrix_exponential() {
        let p = params();
        let h = 1.0 / 250_000.0;
        let omega0 = std::f64::consts::TAU * p.frequency_hz;
        let gamma = std::f64::consts::TAU * p.linewidth_hz;
        let a = [[0.0, h], [-omega0 * omega0 * h, -gamma * h]];
        let mut term = [[1.0, 0.0], [0.0, 1.0]];
        let mut sum = term;
        for k in 1..40 {
            let mut next = [[0.0; 2]; 2];
            for i in 0..2 {
                for j in 0..2 {
                    next[i][j] = (term[i][0] * a[0][j] + term[i][1] * a[1][j]) / k as f64;
                }
            }
            term = next;
            for i in 0..2 {
                for j in 0..2 {
                    sum[i][j] += term[i][j];
                }
            }
        }
        let phi = step_transition(&p, h);
        for i in 0..2 {
            for j in 0..2 {
                let scale = sum[i][j].abs().max(1e-3);
                assert!(
                    (phi[i][j] - sum[i][j]).abs() < 1e-10 * scale,
                    "{i}{j}: {} vs {}",
                    phi[i][j],
                    sum[i][j]
                );
            }
        }
    }

    #[test]
    fn stationary_variance() {
        // Relative s.e. of the mean of x² over T for a narrow line is √(2/(ΓT)) (envelope
        // energy correlated over 1/Γ): Γ = 2π·3 kHz, T = 2 s → 0.73 %; tolerance 4 % (5.5σ).
        let p = OscillatorParams {
            linewidth_hz: 3_000.0,
            ..params()
        };
        let fs = 250_000.0;
        let mut rng = Rng::new(3);
        let mut osc = ThermalOscillator::new(p, fs, &mut rng).unwrap();
        let n = 500_000;
        let mean_sq = (0..n)
            .map(|_| osc.next_sample(&mut rng).powi(2))
            .sum::<f64>()
            / n as f64;
        assert!((mean_sq / p.variance - 1.0).abs() < 0.04, "{mean_sq}");
    }

    #[test]
    fn rejects_overdamped_and_above_nyquist() {
        let mut rng = Rng::new(1);
        let mut p = params();
        p.linewidth_hz = 3.0 * p.frequency_hz;
        assert!(ThermalOscillator::new(p, 250_000.0, &mut rng).is_err());
        let mut p = params();
        p.frequency_hz = 200_000.0;
        assert!(ThermalOscillator::new(p, 250_000.0, &mut rng).is_err());
    }
}
