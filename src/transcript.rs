//! The clip / line / word model (to be written).
