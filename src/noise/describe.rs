//! Describing a bank (to be written).
