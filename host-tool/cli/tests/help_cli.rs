//! The top-level help says what the tool does, its way through a unit and its exit codes.

mod common;

use common::logtrim;

#[test]
fn top_level_help_says_what_the_tool_does() {
    let (code, long, _) = logtrim(&["--help"]);
    assert_eq!(code, 0);
    for want in ["chamber run", "calibration image", "fixed-point tables", "Exit codes", "fit", "verify"] {
        assert!(long.contains(want), "{want:?} missing:\n{long}");
    }
    assert!(!long.contains("thin layer"), "the help is not the package's description:\n{long}");
    let (code, short, _) = logtrim(&["-h"]);
    assert_eq!(code, 0);
    assert!(short.starts_with("Calibrate log-ratio front ends"), "{short}");
}
