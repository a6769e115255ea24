//! The CHANGELOG's table of format versions states what this build reads and writes: the row for the
//! current crate version must match the constants (the policy in CHANGELOG.md, "Versioning policy").

const CHANGELOG: &str = include_str!("../../CHANGELOG.md");

/// The cells of the table row whose first cell is `key`.
fn row(key: &str) -> Option<Vec<String>> {
    CHANGELOG.lines().find_map(|line| {
        let cells: Vec<String> =
            line.trim().trim_matches('|').split('|').map(|c| c.trim().to_string()).collect();
        (cells.first().map(String::as_str) == Some(key)).then_some(cells)
    })
}

#[test]
fn the_current_row_matches_the_format_constants() {
    let version = env!("CARGO_PKG_VERSION");
    let mut parts = version.split('.');
    let (major, minor) = (parts.next().unwrap(), parts.next().unwrap());
    // Before 1.0 a series is a minor version, from 1.0 on a major one.
    let key = if major == "0" { format!("0.{minor}.x") } else { format!("{major}.x") };
    let cells = row(&key).unwrap_or_else(|| panic!("CHANGELOG.md has no row for {key} in its version table"));
    let want = [
        ("calibration image", u64::from(logtrim::image::layout::header::VERSION_VALUE)),
        ("field records (blank)", u64::from(logtrim::field::layout::blank::VERSION_VALUE)),
        ("field records (trim)", u64::from(logtrim::field::layout::trim::VERSION_VALUE)),
        ("fixed-table layout", u64::from(logtrim::fixed::LAYOUT_VERSION)),
        ("calibration file", u64::from(logtrim_host::calfile::VERSION)),
    ];
    // Columns: version, image, records (one number for both record types), layout, calibration file.
    let column = [1, 2, 2, 3, 4];
    for ((what, constant), col) in want.into_iter().zip(column) {
        let cell = cells.get(col).unwrap_or_else(|| panic!("row {key}: no column for {what}"));
        assert_eq!(
            cell.parse::<u64>().ok(),
            Some(constant),
            "CHANGELOG.md row {key}: {what} says {cell:?}, the code's constant is {constant}"
        );
    }
}
