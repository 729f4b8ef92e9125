//! The two drawing back ends of a figure: an SVG writer (text kept as `<text>` elements, the
//! bundled font embedded as a data URL) and a raster one (tiny-skia, antialiased, glyph
//! outlines from the same bundled font through ab_glyph). Both work in points (1/72 inch),
//! y downwards; text is measured with the bundled font's metrics so the layout is the same
//! in both.

use std::fmt::Write as _;

use ab_glyph::{Font, FontRef, GlyphId, OutlineCurve, ScaleFont};

/// The bundled figure font: a subset of DejaVu Sans (assets/fonts/, see make_subset.py).
pub(crate) const FONT_TTF: &[u8] = include_bytes!("../../assets/fonts/FigureSans.ttf");

/// Family name the SVG declares for the embedded font.
pub(crate) const FONT_FAMILY: &str = "StillpointFigureSans";

/// An sRGB colour.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Rgb(pub u8, pub u8, pub u8);

impl Rgb {
    fn hex(self) -> String {
        format!("#{:02x}{:02x}{:02x}", self.0, self.1, self.2)
    }
}

/// How a line is drawn.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Stroke {
    /// Colour.
    pub color: Rgb,
    /// Width in points.
    pub width: f32,
    /// Dash and gap lengths in points, or solid.
    pub dash: Option<(f32, f32)>,
}

/// Horizontal text alignment relative to the anchor point.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Anchor {
    /// The text starts at x.
    Start,
    /// The text is centred on x.
    Middle,
    /// The text ends at x.
    End,
}

/// What a figure is drawn with.
pub(crate) trait Canvas {
    /// A polyline (y down, points).
    fn polyline(&mut self, points: &[(f32, f32)], stroke: Stroke, class: &str);
    /// A rectangle, filled and/or outlined.
    fn rect(&mut self, xywh: (f32, f32, f32, f32), fill: Option<Rgb>, stroke: Option<Stroke>);
    /// Text on a baseline at (x, y); `rotated`: turned 90° anticlockwise about (x, y).
    fn text(
        &mut self,
        at: (f32, f32),
        text: &str,
        size: f32,
        anchor: Anchor,
        rotated: bool,
        class: &str,
    );
    /// Restricts the following drawing to a rectangle (None: no restriction).
    fn clip(&mut self, xywh: Option<(f32, f32, f32, f32)>);
}

/// The bundled font.
///
/// # Panics
/// Never in practice: the font is compiled in and checked by a test.
fn font() -> FontRef<'static> {
    #[allow(clippy::expect_used)] // a compiled-in asset, parsed in a unit test
    FontRef::try_from_slice(FONT_TTF).expect("bundled figure font parses")
}

/// Glyphs and their x positions (points) for `text` at `size`, with kerning; combining
/// marks take no advance. Returns the glyphs and the total advance.
fn layout(text: &str, size: f32) -> (Vec<(GlyphId, f32)>, f32) {
    let font = font();
    let scaled = font.as_scaled(size);
    let mut x = 0.0;
    let mut out = Vec::new();
    let mut previous: Option<GlyphId> = None;
    for c in text.chars() {
        let id = scaled.glyph_id(c);
        if let Some(p) = previous {
            x += scaled.kern(p, id);
        }
        out.push((id, x));
        let combining = ('\u{300}'..='\u{36f}').contains(&c);
        if !combining {
            x += scaled.h_advance(id);
        }
        previous = Some(id);
    }
    (out, x)
}

/// Width of `text` at `size` points, in points.
pub(crate) fn text_width(text: &str, size: f32) -> f32 {
    layout(text, size).1
}

fn escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// Minimal base64 (RFC 4648, with padding) for the embedded font.
fn base64(bytes: &[u8]) -> String {
    const TABLE: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk.first().copied().unwrap_or(0),
            chunk.get(1).copied().unwrap_or(0),
            chunk.get(2).copied().unwrap_or(0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        for (i, shift) in [18, 12, 6, 0].into_iter().enumerate() {
            if i <= chunk.len() {
                out.push(char::from(TABLE[((n >> shift) & 63) as usize]));
            } else {
                out.push('=');
            }
        }
    }
    out
}

/// Writes SVG 1.1.
pub(crate) struct SvgCanvas {
    body: String,
    width_pt: f32,
    height_pt: f32,
    clips: usize,
    clip_open: bool,
}

impl SvgCanvas {
    /// A blank canvas of the given size in points, white background.
    pub fn new(width_pt: f32, height_pt: f32) -> Self {
        let mut canvas = Self {
            body: String::new(),
            width_pt,
            height_pt,
            clips: 0,
            clip_open: false,
        };
        canvas.rect(
            (0.0, 0.0, width_pt, height_pt),
            Some(Rgb(255, 255, 255)),
            None,
        );
        canvas
    }

    /// The finished document.
    pub fn finish(mut self) -> String {
        self.clip(None);
        let (w, h) = (self.width_pt, self.height_pt);
        let mut doc = String::new();
        let _ = write!(
            doc,
            "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<svg xmlns=\"http://www.w3.org/2000/svg\" \
             version=\"1.1\" width=\"{w}pt\" height=\"{h}pt\" viewBox=\"0 0 {w} {h}\">\n<style>\
             @font-face{{font-family:'{FONT_FAMILY}';src:url(data:font/ttf;base64,{})}} \
             text{{font-family:'{FONT_FAMILY}','DejaVu Sans',Verdana,sans-serif;fill:#2b2926}}\
             </style>\n",
            base64(FONT_TTF)
        );
        doc.push_str(&self.body);
        doc.push_str("</svg>\n");
        doc
    }
}

fn dash_attr(stroke: Stroke) -> String {
    stroke
        .dash
        .map(|(on, off)| format!(" stroke-dasharray=\"{on:.2} {off:.2}\""))
        .unwrap_or_default()
}

impl Canvas for SvgCanvas {
    fn polyline(&mut self, points: &[(f32, f32)], stroke: Stroke, class: &str) {
        if points.len() < 2 {
            return;
        }
        let mut d = String::new();
        for (i, (x, y)) in points.iter().enumerate() {
            let _ = write!(d, "{}{x:.2},{y:.2}", if i == 0 { "" } else { " " });
        }
        let _ = writeln!(
            self.body,
            "<polyline class=\"{class}\" fill=\"none\" stroke=\"{}\" stroke-width=\"{:.2}\" \
             stroke-linejoin=\"round\"{} points=\"{d}\"/>",
            stroke.color.hex(),
            stroke.width,
            dash_attr(stroke)
        );
    }

    fn rect(
        &mut self,
        (x, y, w, h): (f32, f32, f32, f32),
        fill: Option<Rgb>,
        stroke: Option<Stroke>,
    ) {
        let fill = fill.map_or_else(|| "none".to_string(), Rgb::hex);
        let stroke_attrs = stroke.map_or_else(String::new, |s| {
            format!(
                " stroke=\"{}\" stroke-width=\"{:.2}\"{}",
                s.color.hex(),
                s.width,
                dash_attr(s)
            )
        });
        let _ = writeln!(
            self.body,
            "<rect x=\"{x:.2}\" y=\"{y:.2}\" width=\"{w:.2}\" height=\"{h:.2}\" fill=\"{fill}\"{stroke_attrs}/>"
        );
    }

    fn text(
        &mut self,
        (x, y): (f32, f32),
        text: &str,
        size: f32,
        anchor: Anchor,
        rotated: bool,
        class: &str,
    ) {
        let anchor = match anchor {
            Anchor::Start => "start",
            Anchor::Middle => "middle",
            Anchor::End => "end",
        };
        let transform = if rotated {
            format!(" transform=\"rotate(-90 {x:.2} {y:.2})\"")
        } else {
            String::new()
        };
        let _ = writeln!(
            self.body,
            "<text class=\"{class}\" x=\"{x:.2}\" y=\"{y:.2}\" font-size=\"{size:.2}\" \
             text-anchor=\"{anchor}\"{transform}>{}</text>",
            escape(text)
        );
    }

    fn clip(&mut self, xywh: Option<(f32, f32, f32, f32)>) {
        if self.clip_open {
            self.body.push_str("</g>\n");
            self.clip_open = false;
        }
        if let Some((x, y, w, h)) = xywh {
            self.clips += 1;
            let id = self.clips;
            let _ = writeln!(
                self.body,
                "<clipPath id=\"clip{id}\"><rect x=\"{x:.2}\" y=\"{y:.2}\" width=\"{w:.2}\" \
                 height=\"{h:.2}\"/></clipPath>\n<g clip-path=\"url(#clip{id})\">"
            );
            self.clip_open = true;
        }
    }
}

/// Draws into an RGBA pixmap with tiny-skia.
pub(crate) struct RasterCanvas {
    pixmap: tiny_skia::Pixmap,
    scale: f32,
    mask: Option<tiny_skia::Mask>,
}

impl RasterCanvas {
    /// A white canvas of `width_pt` × `height_pt` points at `pixels_per_point`.
    /// `None` if the size is zero or too large.
    pub fn new(width_pt: f32, height_pt: f32, pixels_per_point: f32) -> Option<Self> {
        #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)] // checked sizes
        let (w, h) = (
            (width_pt * pixels_per_point).round() as u32,
            (height_pt * pixels_per_point).round() as u32,
        );
        let mut pixmap = tiny_skia::Pixmap::new(w, h)?;
        pixmap.fill(tiny_skia::Color::WHITE);
        Some(Self {
            pixmap,
            scale: pixels_per_point,
            mask: None,
        })
    }

    /// The image as PNG bytes.
    ///
    /// # Errors
    /// The encoder's message.
    pub fn png(&self) -> Result<Vec<u8>, String> {
        self.pixmap.encode_png().map_err(|e| e.to_string())
    }

    fn transform(&self) -> tiny_skia::Transform {
        tiny_skia::Transform::from_scale(self.scale, self.scale)
    }

    fn paint(color: Rgb) -> tiny_skia::Paint<'static> {
        let mut paint = tiny_skia::Paint::default();
        paint.set_color_rgba8(color.0, color.1, color.2, 255);
        paint.anti_alias = true;
        paint
    }
}

impl Canvas for RasterCanvas {
    fn polyline(&mut self, points: &[(f32, f32)], stroke: Stroke, _class: &str) {
        let mut pb = tiny_skia::PathBuilder::new();
        for (i, &(x, y)) in points.iter().enumerate() {
            if i == 0 {
                pb.move_to(x, y);
            } else {
                pb.line_to(x, y);
            }
        }
        let Some(path) = pb.finish() else { return };
        let mut s = tiny_skia::Stroke {
            width: stroke.width,
            line_join: tiny_skia::LineJoin::Round,
            ..tiny_skia::Stroke::default()
        };
        if let Some((on, off)) = stroke.dash {
            s.dash = tiny_skia::StrokeDash::new(vec![on, off], 0.0);
        }
        let transform = self.transform();
        self.pixmap.stroke_path(
            &path,
            &Self::paint(stroke.color),
            &s,
            transform,
            self.mask.as_ref(),
        );
    }

    fn rect(
        &mut self,
        (x, y, w, h): (f32, f32, f32, f32),
        fill: Option<Rgb>,
        stroke: Option<Stroke>,
    ) {
        let Some(r) = tiny_skia::Rect::from_xywh(x, y, w, h) else {
            return;
        };
        let path = tiny_skia::PathBuilder::from_rect(r);
        let transform = self.transform();
        if let Some(color) = fill {
            self.pixmap.fill_path(
                &path,
                &Self::paint(color),
                tiny_skia::FillRule::Winding,
                transform,
                self.mask.as_ref(),
            );
        }
        if let Some(stroke) = stroke {
            let points = [(x, y), (x + w, y), (x + w, y + h), (x, y + h), (x, y)];
            self.polyline(&points, stroke, "");
        }
    }

    fn text(
        &mut self,
        (x, y): (f32, f32),
        text: &str,
        size: f32,
        anchor: Anchor,
        rotated: bool,
        _class: &str,
    ) {
        let font = font();
        let (glyphs, width) = layout(text, size);
        let start = match anchor {
            Anchor::Start => 0.0,
            Anchor::Middle => -width / 2.0,
            Anchor::End => -width,
        };
        let units = font.units_per_em().unwrap_or(1000.0);
        let k = size / units;
        let mut pb = tiny_skia::PathBuilder::new();
        for (id, gx) in glyphs {
            let Some(outline) = font.outline(id) else {
                continue;
            };
            let ox = start + gx;
            // Font units are y up; the canvas is y down.
            let p = |pt: ab_glyph::Point| (ox + pt.x * k, -pt.y * k);
            let mut last: Option<(f32, f32)> = None;
            for curve in &outline.curves {
                let (from, to) = match curve {
                    OutlineCurve::Line(a, b)
                    | OutlineCurve::Quad(a, _, b)
                    | OutlineCurve::Cubic(a, _, _, b) => (p(*a), p(*b)),
                };
                if last != Some(from) {
                    if last.is_some() {
                        pb.close();
                    }
                    pb.move_to(from.0, from.1);
                }
                match curve {
                    OutlineCurve::Line(..) => pb.line_to(to.0, to.1),
                    OutlineCurve::Quad(_, c, _) => {
                        let c = p(*c);
                        pb.quad_to(c.0, c.1, to.0, to.1);
                    }
                    OutlineCurve::Cubic(_, c1, c2, _) => {
                        let (c1, c2) = (p(*c1), p(*c2));
                        pb.cubic_to(c1.0, c1.1, c2.0, c2.1, to.0, to.1);
                    }
                }
                last = Some(to);
            }
            if last.is_some() {
                pb.close();
            }
        }
        let Some(path) = pb.finish() else { return };
        let mut transform = tiny_skia::Transform::from_translate(x, y);
        if rotated {
            transform = transform.pre_rotate(-90.0);
        }
        let transform = transform.post_scale(self.scale, self.scale);
        self.pixmap.fill_path(
            &path,
            &Self::paint(Rgb(43, 41, 38)),
            tiny_skia::FillRule::Winding,
            transform,
            self.mask.as_ref(),
        );
    }

    fn clip(&mut self, xywh: Option<(f32, f32, f32, f32)>) {
        self.mask = xywh.and_then(|(x, y, w, h)| {
            let mut mask = tiny_skia::Mask::new(self.pixmap.width(), self.pixmap.height())?;
            let rect = tiny_skia::Rect::from_xywh(x, y, w, h)?;
            mask.fill_path(
                &tiny_skia::PathBuilder::from_rect(rect),
                tiny_skia::FillRule::Winding,
                true,
                self.transform(),
            );
            Some(mask)
        });
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bundled_font_has_the_figure_glyphs() {
        let font = FontRef::try_from_slice(FONT_TTF).unwrap();
        for c in "Frequency (Hz) S_xx (m²/Hz) f_m γ Q n̄ ± × 10⁻³⁰ ħ √ − µ".chars()
        {
            assert!(font.glyph_id(c).0 != 0 || c == ' ', "no glyph for {c:?}");
        }
        assert!(text_width("Frequency", 10.0) > 30.0);
        // combining macron adds no width
        assert!((text_width("n̄", 10.0) - text_width("n", 10.0)).abs() < 1e-6);
    }

    #[test]
    fn base64_matches_rfc4648_vectors() {
        for (input, want) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(base64(input.as_bytes()), want);
        }
    }
}
