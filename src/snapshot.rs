//! Saved spectra ("snapshots"): a JSON metadata file plus a CSV data file with the same
//! columns as `stillpoint spectrum`, written atomically (temporary file in the same folder,
//! flush, fsync, rename). SKELETON.
