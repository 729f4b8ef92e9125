//! Live application state with no egui dependency: the engine thread (acquisition → Welch →
//! fit), ring buffers for the waterfall and trend strips, snapshots in memory. SKELETON.
