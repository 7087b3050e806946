//! Validation of a manifest and its audio (to be written).
