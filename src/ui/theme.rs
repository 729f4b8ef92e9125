//! Our own look: a light, paper-like theme with ink-coloured text and a muted multi-colour
//! palette for traces (no dark graticule, no single bright trace).

use eframe::egui::{self, Color32, CornerRadius, Stroke};

/// Page background (warm paper).
pub const PAPER: Color32 = Color32::from_rgb(248, 245, 238);
/// Panel background (slightly darker paper).
pub const PANEL: Color32 = Color32::from_rgb(239, 235, 225);
/// Plot background.
pub const PLOT_BG: Color32 = Color32::from_rgb(253, 251, 246);
/// Body text.
pub const INK: Color32 = Color32::from_rgb(43, 41, 38);
/// Secondary text.
pub const PENCIL: Color32 = Color32::from_rgb(110, 104, 96);
/// Errors.
pub const ERROR: Color32 = Color32::from_rgb(178, 34, 34);
/// Warnings.
pub const WARN: Color32 = Color32::from_rgb(166, 108, 20);

/// The live spectrum.
pub const TRACE: Color32 = Color32::from_rgb(52, 84, 122);
/// Fitted mode curve.
pub const FIT: Color32 = Color32::from_rgb(184, 78, 52);
/// Zero-point spectrum and its reference line.
pub const ZERO_POINT: Color32 = Color32::from_rgb(96, 124, 52);
/// SQL of the added noise.
pub const SQL: Color32 = Color32::from_rgb(128, 76, 130);
/// Thermal expectation at the bath temperature.
pub const THERMAL: Color32 = Color32::from_rgb(190, 140, 40);
/// Fit band shading.
pub const BAND: Color32 = Color32::from_rgba_premultiplied(120, 100, 40, 34);
/// Stray-resonance markers.
pub const PEAK: Color32 = Color32::from_rgb(150, 60, 90);
/// Calibration tone marker.
pub const TONE: Color32 = Color32::from_rgb(40, 120, 130);

/// The optical red (Stokes, n̄+1) motional sideband: raspberry, far from the live trace's
/// slate blue and from the fitted mode's terracotta.
pub const SIDEBAND_RED: Color32 = Color32::from_rgb(206, 40, 90);
/// The optical blue (anti-Stokes, n̄) motional sideband: azure, brighter and greener than the
/// live trace.
pub const SIDEBAND_BLUE: Color32 = Color32::from_rgb(24, 138, 214);
/// Fit of the red sideband (darker, long dashes).
pub const SIDEBAND_RED_FIT: Color32 = Color32::from_rgb(110, 16, 50);
/// Fit of the blue sideband (darker, short dashes).
pub const SIDEBAND_BLUE_FIT: Color32 = Color32::from_rgb(10, 70, 120);
/// Occupancy from the calibrated areas (trend).
pub const OCCUPANCY_AREA: Color32 = Color32::from_rgb(96, 124, 52);
/// Occupancy from the sideband asymmetry (trend).
pub const OCCUPANCY_RATIO: Color32 = Color32::from_rgb(206, 40, 90);

/// Colours for overlaid snapshots, in turn (none near the tone's teal, the zero-point olive
/// or the sideband colours).
pub const SNAPSHOT_COLOURS: [Color32; 5] = [
    Color32::from_rgb(96, 96, 96),
    Color32::from_rgb(160, 112, 60),
    Color32::from_rgb(112, 104, 176),
    Color32::from_rgb(200, 150, 170),
    Color32::from_rgb(150, 150, 90),
];

/// Installs the theme on a context.
pub fn install(ctx: &egui::Context) {
    // Hack (bundled with egui) as a fallback of the proportional font, for the superscript
    // minus of the power-of-ten axis labels and ⟨x²⟩.
    let mut fonts = egui::FontDefinitions::default();
    if let Some(list) = fonts.families.get_mut(&egui::FontFamily::Proportional)
        && !list.iter().any(|f| f == "Hack")
    {
        list.insert(1.min(list.len()), "Hack".to_owned());
    }
    ctx.set_fonts(fonts);
    ctx.set_theme(egui::Theme::Light);
    let mut v = egui::Visuals::light();
    v.panel_fill = PANEL;
    v.window_fill = PAPER;
    v.extreme_bg_color = PLOT_BG;
    v.faint_bg_color = Color32::from_rgb(232, 227, 214);
    v.override_text_color = Some(INK);
    v.hyperlink_color = TRACE;
    v.selection.bg_fill = Color32::from_rgb(205, 190, 150);
    v.selection.stroke = Stroke::new(1.0, INK);
    v.window_corner_radius = CornerRadius::same(4);
    v.widgets.noninteractive.bg_stroke = Stroke::new(1.0, Color32::from_rgb(214, 207, 192));
    v.widgets.inactive.weak_bg_fill = Color32::from_rgb(228, 222, 208);
    v.widgets.inactive.bg_fill = Color32::from_rgb(228, 222, 208);
    v.widgets.hovered.weak_bg_fill = Color32::from_rgb(218, 208, 186);
    v.widgets.active.weak_bg_fill = Color32::from_rgb(205, 190, 150);
    ctx.set_visuals_of(egui::Theme::Light, v);
    // egui's small text is 9 px: too small to read for notes, captions and plot titles.
    ctx.all_styles_mut(|style| {
        style.text_styles.insert(
            egui::TextStyle::Small,
            egui::FontId::proportional(SMALL_TEXT_PX),
        );
    });
}

/// Size of the window's small text (notes under panels, plot captions), px.
pub const SMALL_TEXT_PX: f32 = 11.5;

/// Colour of a waterfall cell: `t` in 0..1 from paper through sand and terracotta to plum.
pub fn waterfall_colour(t: f32) -> Color32 {
    const STOPS: [(f32, [f32; 3]); 5] = [
        (0.0, [250.0, 247.0, 240.0]),
        (0.35, [226.0, 204.0, 150.0]),
        (0.6, [196.0, 120.0, 72.0]),
        (0.82, [140.0, 52.0, 70.0]),
        (1.0, [52.0, 30.0, 60.0]),
    ];
    if !t.is_finite() {
        return Color32::from_rgb(230, 230, 230);
    }
    let t = t.clamp(0.0, 1.0);
    for w in STOPS.windows(2) {
        let (a, ca) = w[0];
        let (b, cb) = w[1];
        if t <= b {
            let u = if b > a { (t - a) / (b - a) } else { 0.0 };
            let mix = |i: usize| (ca[i] + (cb[i] - ca[i]) * u).round() as u8;
            return Color32::from_rgb(mix(0), mix(1), mix(2));
        }
    }
    Color32::from_rgb(52, 30, 60)
}
