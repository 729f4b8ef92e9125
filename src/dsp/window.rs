//! Periodic ("DFT-even") windows `w_j = Σ_n c_n cos(2π n j / N)`, j = 0…N−1, coefficients
//! with signs as in Heinzel, Rüdiger & Schilling (2002).

/// The windows the averager offers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum WindowKind {
    /// Rectangular (no window).
    #[serde(rename = "rect")]
    Rectangular,
    /// Hann (0.5, −0.5).
    #[default]
    Hann,
    /// Hamming (0.54, −0.46).
    Hamming,
    /// Blackman–Harris 4-term, −92 dB ("BH92").
    BlackmanHarris,
    /// Flat-top HFT95 (Heinzel et al. 2002, App. D).
    #[serde(rename = "flattop")]
    FlatTop,
}

impl WindowKind {
    /// All windows, in menu order.
    pub const ALL: [Self; 5] = [
        Self::Rectangular,
        Self::Hann,
        Self::Hamming,
        Self::BlackmanHarris,
        Self::FlatTop,
    ];

    /// The command-line spelling: `rect`, `hann`, `hamming`, `blackman-harris`, `flattop`.
    pub fn name(self) -> &'static str {
        match self {
            Self::Rectangular => "rect",
            Self::Hann => "hann",
            Self::Hamming => "hamming",
            Self::BlackmanHarris => "blackman-harris",
            Self::FlatTop => "flattop",
        }
    }

    /// Parses the command-line spelling.
    pub fn parse(text: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|w| w.name() == text)
    }

    /// Cosine-sum coefficients c₀, c₁, … (signs included).
    pub fn coefficients(self) -> &'static [f64] {
        match self {
            Self::Rectangular => &[1.0],
            Self::Hann => &[0.5, -0.5],
            Self::Hamming => &[0.54, -0.46],
            Self::BlackmanHarris => &[0.35875, -0.48829, 0.14128, -0.01168],
            Self::FlatTop => &[1.0, -1.938_337_9, 1.304_520_2, -0.402_827, 0.035_066_5],
        }
    }

    /// Half-width M (bins) of the sum that reads a tone's power robustly, Σ_{|k−k₀|≤M}
    /// (METHODS.md §1: 3 for Hann and BH92, 5 for the flat-top).
    pub fn tone_half_width_bins(self) -> usize {
        match self {
            Self::Rectangular => 3,
            Self::Hann | Self::Hamming | Self::BlackmanHarris => 3,
            Self::FlatTop => 5,
        }
    }

    /// The N window samples.
    pub fn samples(self, n: usize) -> Vec<f64> {
        let c = self.coefficients();
        (0..n)
            .map(|j| {
                c.iter()
                    .enumerate()
                    .map(|(m, cm)| {
                        cm * (2.0 * std::f64::consts::PI * m as f64 * j as f64 / n as f64).cos()
                    })
                    .sum()
            })
            .collect()
    }
}
