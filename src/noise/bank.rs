//! Loading a bank (to be written).

use std::path::Path;

use super::{BankError, NoiseBank};

/// Find every file under `root` (recursively; hidden files and folders skipped), decode each
/// to mono (mean of channels), bring it to `rate`, and mark the held-out part by
/// `held_out_fraction`. Files that cannot be decoded or hold no samples are listed in
/// `skipped`, not fatal, unless no file is usable. Decoding runs in parallel; the result
/// does not depend on the thread count.
///
/// # Errors
/// A missing or unreadable folder, a folder with no files, or no usable file.
pub fn load_bank(root: &Path, rate: u32, held_out_fraction: f64) -> Result<NoiseBank, BankError> {
    let _ = (root, rate, held_out_fraction);
    todo!("noise::load_bank")
}
