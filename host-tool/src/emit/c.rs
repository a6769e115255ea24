//! C header (pending).
use super::Provenance;
use crate::tables::FixedTables;
/// pending
pub fn render(_t: &FixedTables, _p: &Provenance) -> String {
    String::new()
}
