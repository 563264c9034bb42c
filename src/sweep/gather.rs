//! Placeholder of the gather (issue #19, item 4), built separately and merged over this file:
//! it reads only the sweep folder (`members.csv` and the member folders) and writes
//! `<sweep>/gather/` and `<sweep>/report.html`. Until then it refuses to run.

use std::path::Path;

/// What a gather found (filled in by the gather proper).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct GatherSummary {}

/// Why a gather failed.
#[derive(Debug, thiserror::Error)]
pub enum GatherError {
    /// The gather is not part of this build yet.
    #[error("gather: not built yet")]
    NotBuilt,
}

/// Gathers the sweep folder `root` (not built yet: always an error).
pub fn gather(root: &Path) -> Result<GatherSummary, GatherError> {
    let _ = root;
    Err(GatherError::NotBuilt)
}
