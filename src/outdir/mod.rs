//! The output folder of a command that writes a set of files (`run`, `slice`, `remap`,
//! `export`, `import`): one writer at a time ([`lock`]), never over its own inputs
//! ([`overlap`]), and after a finished run nothing but what its manifest lists
//! ([`earlier`]).

pub mod earlier;
pub mod lock;
pub mod overlap;

pub use earlier::Earlier;
pub use lock::{FolderLock, LOCK_NAME, LockError, SharedFolderLock};
pub use overlap::{Overwrite, Targets, refuse_overwrite};
