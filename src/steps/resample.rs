//! The `resample` step (to be written).

use crate::recipe::{Params, RecipeError};
use crate::steps::{PlanContext, Step};

/// Read the step's keys.
///
/// # Errors
/// A missing or impossible key.
pub fn parse(params: &mut Params<'_>, ctx: &PlanContext) -> Result<Box<dyn Step>, RecipeError> {
    let _ = ctx;
    Err(params.error("do", "not written yet"))
}
