//! `lightfold film` (to be written).

use super::Failure;

#[derive(clap::Args)]
pub struct FilmArgs {}

pub fn run(_args: FilmArgs) -> Result<(), Failure> {
    Err(Failure::Internal("not written yet".into()))
}
