//! "Export figure": the publication figure of [`crate::figure`] made from the current plot
//! (the frequency range in view and the overlays switched on), written to the typed export
//! path as SVG or PNG by its extension. The same drawing code as `analyze --figure`.

use crate::figure::{self, FigureView};

impl super::StillpointApp {
    /// Writes the figure to the typed export path; a message says how it went.
    pub(super) fn export_figure(&mut self) {
        let typed = self.files.png_path.trim();
        if typed.is_empty() {
            return self.error(
                super::MessageKind::Export,
                "type a path ending in .svg or .png for the figure first",
            );
        }
        let path = std::path::PathBuf::from(typed);
        let Some(frame) = self.live.frame.clone() else {
            return self.error(
                super::MessageKind::Export,
                "nothing to draw yet: no spectrum has arrived",
            );
        };
        let (Some(spectrum), Some(report)) = (frame.spectrum.as_ref(), frame.report.as_ref())
        else {
            return self.error(
                super::MessageKind::Export,
                "nothing to draw yet: no analysed spectrum",
            );
        };
        let o = &self.state.overlays;
        let view = FigureView {
            x_range_hz: self.plot.view_hz,
            fit: o.fit,
            zero_point: o.zero_point,
            sql: o.sql,
            thermal: o.thermal,
            ..FigureView::default()
        };
        let bytes = match figure::render_for_path(&path, spectrum, report, &view) {
            Ok(b) => b,
            Err(e) => return self.error(super::MessageKind::Export, e.to_string()),
        };
        let written = crate::io::atomic::write_atomic(&path, false, |out| {
            std::io::Write::write_all(out, &bytes)
        });
        match written {
            Ok(()) => self.info(
                super::MessageKind::Export,
                format!("figure written to {}", path.display()),
            ),
            Err(e) => self.error(
                super::MessageKind::Export,
                format!(
                    "cannot write {} ({}); an existing file is never replaced here",
                    path.display(),
                    match e {
                        crate::io::atomic::AtomicError::Io(e)
                        | crate::io::atomic::AtomicError::Inner(e) => e,
                    }
                ),
            ),
        }
    }
}
