//! The tables compiled under the renamed dependency are the host's tables of the same unit, and correct
//! like them.

use logtrim_host::calfile::CalFile;
use logtrim_host::tables::TableOptions;

#[test]
fn compiled_tables_under_the_renamed_crate_are_the_hosts() {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/../../examples/dyeline/calibration/COEFFS.json");
    let file = CalFile::load(path.as_ref()).unwrap();
    let tables = file.fixed_tables(&TableOptions::default()).unwrap();
    let compiled = logtrim_renamed_dep::unit::LOGTRIM_FIXED;
    assert_eq!(compiled, tables.view());
    assert_eq!(compiled.validate(), Ok(()));
    assert_eq!(compiled.correct(30_000, 25_000), tables.view().correct(30_000, 25_000));
}
