//! `lightfold materials` (to be written).

use super::Failure;

#[derive(clap::Args)]
pub struct MaterialsArgs {}

pub fn run(_args: MaterialsArgs) -> Result<(), Failure> {
    Err(Failure::Internal("not written yet".into()))
}
