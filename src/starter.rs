//! `sextant new`: inspect a table and write a commented starter recipe (being written).

use crate::error::Error;
use std::path::Path;

/// Inspects `data` and writes a starter recipe to `output` (or beside the data).
pub fn run_new(_data: &Path, _output: Option<&Path>, _force: bool) -> Result<String, Error> {
    unimplemented!("sextant new is being written")
}
