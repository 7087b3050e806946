//! The batch engine (to be written).
