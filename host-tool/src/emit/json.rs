//! JSON of a unit's tables: [`crate::tables::FixedTables`] with a generator line, for tools that build
//! images or check tables elsewhere.

use serde::Serialize;

use super::{banner, Provenance};
use crate::tables::FixedTables;

#[derive(Serialize)]
struct Doc<'a> {
    format: &'static str,
    generator: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    unit: Option<&'a str>,
    #[serde(skip_serializing_if = "Option::is_none")]
    source: Option<&'a str>,
    bytes: usize,
    tables: &'a FixedTables,
}

/// The `format` string of emitted table JSON.
pub const FORMAT: &str = "logtrim-fixed-tables";

/// JSON of a unit's tables.
pub fn render(t: &FixedTables, prov: &Provenance) -> String {
    let doc = Doc {
        format: FORMAT,
        generator: banner(),
        unit: prov.unit.as_deref(),
        source: prov.source.as_deref(),
        bytes: t.bytes(),
        tables: t,
    };
    // Plain data with string keys: serialisation cannot fail.
    let mut s = serde_json::to_string_pretty(&doc).unwrap_or_default();
    s.push('\n');
    s
}
