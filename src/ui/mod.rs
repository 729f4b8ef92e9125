//! The desktop window (eframe + egui_plot). Only this module imports egui. SKELETON.
