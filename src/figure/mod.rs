//! Publication figures of a spectrum and its analysis (`analyze --figure OUT.svg|OUT.png`,
//! the window's "Export figure"): a log-log plot of the calibrated PSD (m²/Hz; V²/Hz when
//! uncalibrated) with the fitted mode, the zero-point spectrum 2ħ Im χ, the SQL of the added
//! noise 2ħ|χ| and the thermal expectation 2ħ coth(ħΩ/2k_BT) Im χ where the mass (and the
//! bath temperature) are known (METHODS.md §2b, §3), SI axis labels, a legend and a caption
//! box with f_m, γ, Q and n̄, each ± its 1σ uncertainty from the report (σ to two
//! significant digits, the value to the same place: [`format::with_uncertainty`]).
//!
//! [`Figure::from_analysis`] builds the figure's content (plain data: curves in SI units,
//! ranges, labels); [`Figure::svg`] and [`Figure::png`] draw it. Sizes: [`FigureSize::Column`]
//! is 3.4 in × 2.6 in with 7 pt text (one journal column; PNG at 600 dpi),
//! [`FigureSize::Slide`] 10 in × 5.625 in with 16 pt text (16:9; PNG 1920 × 1080).
//! Text uses a bundled font (a subset of DejaVu Sans, compiled in): no system font lookup;
//! the SVG embeds it as well.

mod canvas;
pub mod format;

use std::path::Path;

use crate::dsp::Spectrum;
use crate::physics::oscillator::{Oscillator, lorentzian_psd, oscillator_psd};
use crate::physics::quantum;
use crate::report::Report;

use canvas::text_width;
use canvas::{Anchor, Canvas, RasterCanvas, Rgb, Stroke, SvgCanvas};

/// Why a figure could not be made.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum FigureError {
    /// The output name does not end in `.svg` or `.png`.
    #[error("the figure must be a .svg or .png file, not `{0}`")]
    Extension(String),
    /// Nothing can be drawn (no positive bins in the range).
    #[error("nothing to draw: {0}")]
    Empty(String),
    /// The PNG could not be made.
    #[error("cannot render the PNG figure: {0}")]
    Render(String),
}

/// Result alias for figures.
pub type Result<T> = std::result::Result<T, FigureError>;

/// The output format, chosen by extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum FigureFormat {
    /// Scalable vector graphics (text stays text).
    Svg,
    /// Portable network graphics.
    Png,
}

impl FigureFormat {
    /// `.svg` or `.png` (any case).
    ///
    /// # Errors
    /// [`FigureError::Extension`] for anything else.
    pub fn from_path(path: &Path) -> Result<Self> {
        match path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase)
            .as_deref()
        {
            Some("svg") => Ok(Self::Svg),
            Some("png") => Ok(Self::Png),
            _ => Err(FigureError::Extension(path.display().to_string())),
        }
    }
}

/// Physical size and type size.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum FigureSize {
    /// One journal column: 3.4 in × 2.6 in, 7 pt text; PNG at 600 dpi (2040 × 1560 px).
    #[default]
    Column,
    /// A 16:9 slide: 10 in × 5.625 in, 16 pt text; PNG 1920 × 1080 px.
    Slide,
}

impl FigureSize {
    /// (width, height, font size) in points.
    pub fn points(self) -> (f32, f32, f32) {
        match self {
            Self::Column => (244.8, 187.2, 7.0),
            Self::Slide => (720.0, 405.0, 16.0),
        }
    }

    /// Pixels per point of the PNG.
    pub(crate) fn pixels_per_point(self) -> f32 {
        match self {
            Self::Column => 600.0 / 72.0,
            Self::Slide => 1920.0 / 720.0,
        }
    }
}

/// What a curve shows (decides its colour, dash and SVG class).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SeriesKind {
    /// The measured (Welch) spectrum.
    Measured,
    /// The fitted mode plus background.
    Fit,
    /// Zero-point spectrum 2ħ Im χ.
    ZeroPoint,
    /// SQL of the added noise 2ħ|χ|.
    Sql,
    /// Thermal expectation at the bath temperature.
    Thermal,
}

impl SeriesKind {
    /// The SVG class (`series measured`, …).
    pub fn class(self) -> &'static str {
        match self {
            Self::Measured => "series measured",
            Self::Fit => "series fit",
            Self::ZeroPoint => "series zero-point",
            Self::Sql => "series sql",
            Self::Thermal => "series thermal",
        }
    }

    fn stroke(self, base: f32) -> Stroke {
        // Our palette (src/ui/theme.rs), darkened a little for print.
        let (color, width, dash) = match self {
            Self::Measured => (Rgb(52, 84, 122), 0.7, None),
            Self::Fit => (Rgb(184, 78, 52), 1.0, None),
            Self::ZeroPoint => (Rgb(86, 114, 42), 0.9, Some((3.0, 1.6))),
            Self::Sql => (Rgb(128, 76, 130), 0.9, Some((1.0, 1.4))),
            Self::Thermal => (Rgb(176, 126, 30), 0.9, Some((5.0, 1.6))),
        };
        let k = base / 7.0;
        Stroke {
            color,
            width: width * k,
            dash: dash.map(|(a, b)| (a * k, b * k)),
        }
    }
}

/// One curve: points (frequency in Hz, PSD in the figure's unit), all positive.
#[derive(Debug, Clone, PartialEq)]
pub struct Series {
    /// Legend text.
    pub name: String,
    /// What it is.
    pub kind: SeriesKind,
    /// (Hz, unit²/Hz), ascending in frequency.
    pub points: Vec<(f64, f64)>,
}

/// Which overlays to draw and over what range (the window passes its current view).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct FigureView {
    /// Frequency range in Hz; `None`: around the fitted mode, else the whole span.
    pub x_range_hz: Option<(f64, f64)>,
    /// Draw the fitted mode.
    pub fit: bool,
    /// Draw the zero-point spectrum (needs calibration and mass).
    pub zero_point: bool,
    /// Draw the SQL curve (needs calibration and mass).
    pub sql: bool,
    /// Draw the thermal expectation (needs calibration, mass and bath temperature).
    pub thermal: bool,
    /// Physical size.
    pub size: FigureSize,
}

impl Default for FigureView {
    fn default() -> Self {
        Self {
            x_range_hz: None,
            fit: true,
            zero_point: true,
            sql: true,
            thermal: true,
            size: FigureSize::Column,
        }
    }
}

/// A figure's content, ready to draw.
#[derive(Debug, Clone, PartialEq)]
pub struct Figure {
    /// Frequency axis range, Hz.
    pub x_range_hz: (f64, f64),
    /// PSD axis range, in the figure's unit.
    pub y_range: (f64, f64),
    /// Vertical axis label (`Displacement PSD Sₓₓ (m²/Hz)` or `Voltage PSD (V²/Hz)`).
    pub y_label: String,
    /// Curves, drawn in order.
    pub series: Vec<Series>,
    /// Caption lines (f_m, γ, Q, n̄ with uncertainties).
    pub caption: Vec<String>,
    /// Physical size.
    pub size: FigureSize,
}

/// Log-spaced frequencies over `range`, plus a dense grid across ±40 γ of the mode.
fn curve_grid(range: (f64, f64), mode: Option<(f64, f64)>) -> Vec<f64> {
    let (lo, hi) = range;
    let n = 600;
    let (a, b) = (lo.ln(), hi.ln());
    let mut grid: Vec<f64> = (0..=n)
        .map(|i| (a + (b - a) * f64::from(i) / f64::from(n)).exp())
        .collect();
    if let Some((fm, gamma)) = mode {
        grid.extend((-320..=320).map(|i| fm + gamma * f64::from(i) / 8.0));
    }
    grid.retain(|f| *f >= lo && *f <= hi && *f > 0.0);
    grid.sort_by(f64::total_cmp);
    grid.dedup();
    grid
}

impl Figure {
    /// The figure of `spectrum` analysed into `report`.
    ///
    /// # Errors
    /// [`FigureError::Empty`] if the range holds no positive finite PSD value.
    pub(crate) fn from_analysis(
        spectrum: &Spectrum,
        report: &Report,
        view: &FigureView,
    ) -> Result<Self> {
        let cal = report
            .calibration
            .m_per_v
            .filter(|c| c.is_finite() && *c > 0.0);
        let scale = cal.map_or(1.0, |c| c * c);
        let mode = &report.mode;
        let fitted = match (mode.frequency_hz, mode.linewidth_hz) {
            (Some(f), Some(g)) if f > 0.0 && g > 0.0 && f.is_finite() && g.is_finite() => {
                Some((f, g))
            }
            _ => None,
        };
        let nyquist = spectrum.frequency_hz(spectrum.len().saturating_sub(1));
        let first = spectrum.resolution_hz;
        let x_range = match (view.x_range_hz, fitted) {
            (Some((lo, hi)), _) => (lo.max(first * 0.5), hi.min(nyquist)),
            (None, Some((fm, g))) => {
                let (blo, bhi) = mode.fit_band_hz.unwrap_or((fm - 25.0 * g, fm + 25.0 * g));
                let half = (bhi - blo).max(20.0 * g).max(10.0 * first);
                ((fm - half).max(first), (fm + half).min(nyquist))
            }
            (None, None) => (first, nyquist),
        };
        if !(x_range.0 > 0.0 && x_range.1 > x_range.0) {
            return Err(FigureError::Empty(format!(
                "the frequency range {} to {} Hz is empty",
                x_range.0, x_range.1
            )));
        }
        let measured: Vec<(f64, f64)> = (1..spectrum.len())
            .filter_map(|k| {
                let f = spectrum.frequency_hz(k);
                let p = spectrum.psd_v2_per_hz.get(k)? * scale;
                (f >= x_range.0 && f <= x_range.1 && p > 0.0 && p.is_finite()).then_some((f, p))
            })
            .collect();
        if measured.is_empty() {
            return Err(FigureError::Empty(format!(
                "no spectrum bin between {} and {} Hz",
                x_range.0, x_range.1
            )));
        }
        let mut series = vec![Series {
            name: format!("measured (Welch, K = {})", spectrum.averages),
            kind: SeriesKind::Measured,
            points: measured,
        }];
        let grid = curve_grid(x_range, fitted);
        let curve = |f: &dyn Fn(f64) -> f64| -> Vec<(f64, f64)> {
            grid.iter()
                .map(|&x| (x, f(x)))
                .filter(|(_, y)| y.is_finite() && *y > 0.0)
                .collect()
        };
        if let (true, Some((fm, g))) = (view.fit, fitted) {
            let (area, background) = if cal.is_some() {
                (mode.variance_m2, mode.background_psd_m2_per_hz)
            } else {
                (mode.variance_v2, mode.background_psd_v2_per_hz)
            };
            if let Some(area) = area.filter(|a| a.is_finite() && *a > 0.0) {
                let b = background.filter(|b| b.is_finite()).unwrap_or(0.0);
                let lorentz = mode.line_shape.as_deref() == Some("lorentzian");
                let shape = move |x: f64| {
                    b + if lorentz {
                        lorentzian_psd(x, area, fm, g)
                    } else {
                        oscillator_psd(x, area, fm, g)
                    }
                };
                series.push(Series {
                    name: format!(
                        "fit: {} + floor",
                        if lorentz { "Lorentzian" } else { "oscillator" }
                    ),
                    kind: SeriesKind::Fit,
                    points: curve(&shape),
                });
            }
        }
        let mass = report.quantum.mass_kg.filter(|m| m.is_finite() && *m > 0.0);
        if let (Some(_), Some(mass), Some((fm, g))) = (cal, mass, fitted)
            && let Ok(osc) = Oscillator::new(mass, fm, g)
        {
            if view.zero_point {
                series.push(Series {
                    name: "zero-point 2ħ Im χ".into(),
                    kind: SeriesKind::ZeroPoint,
                    points: curve(&|x| quantum::zero_point_psd_at(&osc, x)),
                });
            }
            if view.sql {
                series.push(Series {
                    name: "SQL, added noise 2ħ|χ|".into(),
                    kind: SeriesKind::Sql,
                    points: curve(&|x| quantum::sql_psd_at(&osc, x)),
                });
            }
            if view.thermal
                && let Some(t) = report.quantum.bath_temperature_k.filter(|t| *t > 0.0)
            {
                series.push(Series {
                    name: format!("thermal at {} K", format::significant(t, 3)),
                    kind: SeriesKind::Thermal,
                    points: curve(&|x| quantum::quantum_thermal_psd_at(&osc, t, x)),
                });
            }
        }
        let y_range = y_range(&series, fitted);
        let y_label = if cal.is_some() {
            "Displacement PSD Sₓₓ (m²/Hz)".to_string()
        } else {
            "Voltage PSD (V²/Hz)".to_string()
        };
        Ok(Self {
            x_range_hz: x_range,
            y_range,
            y_label,
            series,
            caption: caption(report),
            size: view.size,
        })
    }

    /// The figure as an SVG document.
    pub fn svg(&self) -> String {
        let (w, h, _) = self.size.points();
        let mut canvas = SvgCanvas::new(w, h);
        self.draw(&mut canvas);
        canvas.finish()
    }

    /// The figure as PNG bytes.
    ///
    /// # Errors
    /// [`FigureError::Render`] if the image cannot be allocated or encoded.
    pub fn png(&self) -> Result<Vec<u8>> {
        let (w, h, _) = self.size.points();
        let mut canvas = RasterCanvas::new(w, h, self.size.pixels_per_point())
            .ok_or_else(|| FigureError::Render("cannot allocate the image".into()))?;
        self.draw(&mut canvas);
        canvas.png().map_err(FigureError::Render)
    }

    /// The figure in `format`.
    ///
    /// # Errors
    /// As [`Figure::png`].
    pub(crate) fn render(&self, format: FigureFormat) -> Result<Vec<u8>> {
        match format {
            FigureFormat::Svg => Ok(self.svg().into_bytes()),
            FigureFormat::Png => self.png(),
        }
    }

    #[allow(clippy::cast_possible_truncation, clippy::too_many_lines)] // f64 → f32 drawing coordinates
    fn draw(&self, canvas: &mut dyn Canvas) {
        let (width, height, s) = self.size.points();
        let ink = Rgb(43, 41, 38);
        let frame = Stroke {
            color: ink,
            width: 0.6 * s / 7.0,
            dash: None,
        };
        let grid_stroke = Stroke {
            color: Rgb(228, 223, 212),
            width: 0.35 * s / 7.0,
            dash: None,
        };
        let (xlo, xhi) = self.x_range_hz;
        let (ylo, yhi) = self.y_range;
        let (divisor, unit) = format::frequency_unit(xhi);
        let x_ticks = format::log_ticks(xlo, xhi, divisor, false);
        let y_ticks = format::log_ticks(ylo, yhi, 1.0, true);
        let tick_len = 0.45 * s;
        let y_tick_width = y_ticks
            .iter()
            .map(|(_, l)| text_width(l, s))
            .fold(0.0_f32, f32::max);
        let left = 0.3 * s + 1.2 * s + 0.5 * s + y_tick_width + 0.4 * s;
        let bottom = tick_len + 0.4 * s + 1.0 * s + 0.5 * s + 1.2 * s;
        let top = 0.7 * s;
        let right = 0.9 * s + x_ticks.last().map_or(0.0, |(_, l)| text_width(l, s) / 2.0);
        let plot = (left, top, width - left - right, height - top - bottom);
        let (px, py, pw, ph) = plot;
        let (lx0, lx1) = (xlo.log10(), xhi.log10());
        let (ly0, ly1) = (ylo.log10(), yhi.log10());
        let to_x = |f: f64| px + pw * ((f.log10() - lx0) / (lx1 - lx0)) as f32;
        let to_y = |v: f64| py + ph * (1.0 - ((v.log10() - ly0) / (ly1 - ly0)) as f32);

        // grid
        for (v, _) in &x_ticks {
            let x = to_x(*v);
            canvas.polyline(&[(x, py), (x, py + ph)], grid_stroke, "grid");
        }
        for (v, _) in &y_ticks {
            let y = to_y(*v);
            canvas.polyline(&[(px, y), (px + pw, y)], grid_stroke, "grid");
        }
        // curves
        canvas.clip(Some(plot));
        for series in &self.series {
            let points = decimate(&series.points, pw * 4.0, &to_x, &to_y);
            canvas.polyline(&points, series.kind.stroke(s), series.kind.class());
        }
        canvas.clip(None);
        canvas.rect(plot, None, Some(frame));
        // ticks and labels
        for (v, label) in &x_ticks {
            let x = to_x(*v);
            canvas.polyline(&[(x, py + ph), (x, py + ph - tick_len)], frame, "tick");
            canvas.text(
                (x, py + ph + 0.4 * s + s),
                label,
                s,
                Anchor::Middle,
                false,
                "tick-label x",
            );
        }
        for (v, label) in &y_ticks {
            let y = to_y(*v);
            canvas.polyline(&[(px, y), (px + tick_len, y)], frame, "tick");
            canvas.text(
                (px - 0.4 * s, y + 0.35 * s),
                label,
                s,
                Anchor::End,
                false,
                "tick-label y",
            );
        }
        canvas.text(
            (px + pw / 2.0, height - 0.45 * s),
            &format!("Frequency ({unit})"),
            s,
            Anchor::Middle,
            false,
            "axis-label x",
        );
        canvas.text(
            (0.3 * s + s, py + ph / 2.0),
            &self.y_label,
            s,
            Anchor::Middle,
            true,
            "axis-label y",
        );
        // legend, top right inside the plot
        let line_h = 1.25 * s;
        let pad = 0.45 * s;
        let sample = 2.2 * s;
        let legend_w = self
            .series
            .iter()
            .map(|r| text_width(&r.name, s * 0.9))
            .fold(0.0_f32, f32::max)
            + sample
            + 3.0 * pad;
        let legend_h = line_h * self.series.len() as f32 + pad;
        let lx = px + pw - legend_w - pad;
        let ly = py + pad;
        canvas.rect(
            (lx, ly, legend_w, legend_h),
            Some(Rgb(255, 255, 255)),
            Some(Stroke {
                color: Rgb(200, 194, 182),
                width: 0.4 * s / 7.0,
                dash: None,
            }),
        );
        for (i, series) in self.series.iter().enumerate() {
            let y = ly + pad + line_h * (i as f32 + 0.5);
            canvas.polyline(
                &[(lx + pad, y), (lx + pad + sample, y)],
                series.kind.stroke(s),
                "legend-sample",
            );
            canvas.text(
                (lx + 2.0 * pad + sample, y + 0.33 * s),
                &series.name,
                s * 0.9,
                Anchor::Start,
                false,
                "legend",
            );
        }
        // caption box, top left inside the plot
        if !self.caption.is_empty() {
            let cap_w = self
                .caption
                .iter()
                .map(|l| text_width(l, s))
                .fold(0.0_f32, f32::max)
                + 2.0 * pad;
            let cap_h = line_h * self.caption.len() as f32 + pad;
            let cx = px + pad;
            let cy = py + pad;
            canvas.rect(
                (cx, cy, cap_w, cap_h),
                Some(Rgb(250, 248, 242)),
                Some(Stroke {
                    color: Rgb(200, 194, 182),
                    width: 0.4 * s / 7.0,
                    dash: None,
                }),
            );
            for (i, line) in self.caption.iter().enumerate() {
                let y = cy + pad + line_h * (i as f32 + 0.5) + 0.35 * s;
                canvas.text((cx + pad, y), line, s, Anchor::Start, false, "caption");
            }
        }
    }
}

/// Caption lines: f_m, γ, Q, n̄, each with its 1σ, as the report has them.
fn caption(report: &Report) -> Vec<String> {
    let mode = &report.mode;
    let q = &report.quantum;
    let mut lines = Vec::new();
    let mut push = |name: &str, value: Option<f64>, sigma: Option<f64>, unit: &str| {
        if let Some(v) = value.filter(|v| v.is_finite()) {
            lines.push(format!(
                "{name} = {}{unit}",
                format::with_uncertainty(v, sigma)
            ));
        }
    };
    push(
        "fₘ",
        mode.frequency_hz,
        mode.frequency_hz_uncertainty,
        " Hz",
    );
    push("γ", mode.linewidth_hz, mode.linewidth_hz_uncertainty, " Hz");
    push(
        "Q",
        mode.quality_factor,
        mode.quality_factor_uncertainty,
        "",
    );
    push("n̄", q.occupancy, q.occupancy_uncertainty, "");
    lines
}

/// PSD range: the measured data and the curves' values at the mode, padded and widened to
/// whole decades; the data fill the lower part so the legend and caption sit above them.
fn y_range(series: &[Series], mode: Option<(f64, f64)>) -> (f64, f64) {
    let mut lo = f64::INFINITY;
    let mut hi = 0.0_f64;
    for s in series {
        let values: Vec<f64> = match (s.kind, mode) {
            (SeriesKind::Measured | SeriesKind::Fit, _) | (_, None) => {
                s.points.iter().map(|p| p.1).collect()
            }
            // Reference curves: their peak decides; their far wings may fall off the axis.
            (_, Some(_)) => s
                .points
                .iter()
                .map(|p| p.1)
                .fold(None, |m: Option<f64>, v| Some(m.map_or(v, |m| m.max(v))))
                .into_iter()
                .collect(),
        };
        for v in values {
            lo = lo.min(v);
            hi = hi.max(v);
        }
    }
    if !(lo.is_finite() && hi > 0.0 && lo > 0.0) {
        return (1e-3, 1.0);
    }
    let lo = lo / 2.0;
    let decades = (hi / lo).log10().max(1.0);
    let top = hi * 10_f64.powf(0.65 * decades);
    // Whole decades at both ends, so the axis always carries at least two labelled powers.
    (
        10_f64.powf(lo.log10().floor()),
        10_f64.powf(top.log10().ceil()),
    )
}

/// Points mapped to the canvas, at most ~`columns` of them: where several fall in one
/// column the first, lowest, highest and last are kept (the drawn envelope is unchanged).
fn decimate(
    points: &[(f64, f64)],
    columns: f32,
    to_x: &dyn Fn(f64) -> f32,
    to_y: &dyn Fn(f64) -> f32,
) -> Vec<(f32, f32)> {
    let mapped: Vec<(f32, f32)> = points.iter().map(|&(f, v)| (to_x(f), to_y(v))).collect();
    if (mapped.len() as f32) <= columns {
        return mapped;
    }
    let mut out = Vec::new();
    let mut i = 0;
    while i < mapped.len() {
        let column = (mapped[i].0 * 4.0).floor();
        let mut j = i;
        let (mut lo, mut hi) = (i, i);
        while j < mapped.len() && (mapped[j].0 * 4.0).floor() == column {
            if mapped[j].1 < mapped[lo].1 {
                lo = j;
            }
            if mapped[j].1 > mapped[hi].1 {
                hi = j;
            }
            j += 1;
        }
        let mut keep = vec![i, lo, hi, j - 1];
        keep.sort_unstable();
        keep.dedup();
        out.extend(keep.into_iter().map(|k| mapped[k]));
        i = j;
    }
    out
}

/// Writes the figure of `spectrum`/`report` to `path` (format from the extension),
/// atomically is the caller's business; returns the bytes to write.
///
/// # Errors
/// A bad extension, an empty range, a rendering failure.
pub(crate) fn render_for_path(
    path: &Path,
    spectrum: &Spectrum,
    report: &Report,
    view: &FigureView,
) -> Result<Vec<u8>> {
    let format = FigureFormat::from_path(path)?;
    Figure::from_analysis(spectrum, report, view)?.render(format)
}
