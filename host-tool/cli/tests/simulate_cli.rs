//! `logtrim simulate` end to end: files, exit codes, and the `--write-preset` round trip.

mod common;

use common::{logtrim, scratch, write_preset};
use std::path::Path;

const SMALL: &[&str] = &["--setpoints", "5", "--ratios", "9", "--repeats", "1", "--validation", "200"];

fn run_small(extra: &[&str], out: &Path) -> (i32, String, String) {
    let mut args = vec!["simulate", "--out-dir", out.to_str().unwrap()];
    args.extend_from_slice(SMALL);
    args.extend_from_slice(extra);
    logtrim(&args)
}

#[test]
fn written_preset_simulates_exactly_like_the_preset() {
    let d = scratch("preset");
    let json = d.join("mine.json");
    write_preset("gas-uncompensated", &json);
    let (a, b) = (d.join("a"), d.join("b"));
    let (code, out, err) = run_small(&["--preset", "gas-uncompensated", "--seed", "42"], &a);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("oracle on the validation run") && out.contains("Np"), "{out}");
    let (code, _, err) = run_small(&["--frontend", json.to_str().unwrap(), "--seed", "42"], &b);
    assert_eq!(code, 0, "{err}");
    for f in ["cal.csv", "readings.csv", "truth.csv", "frontend.json"] {
        assert_eq!(std::fs::read(a.join(f)).unwrap(), std::fs::read(b.join(f)).unwrap(), "{f}");
    }
    assert_eq!(std::fs::read_to_string(a.join("cal.csv")).unwrap().lines().count(), 1 + 5 * 9);
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn bad_input_exits_2_with_a_specific_message() {
    let d = scratch("bad");
    let (code, _, err) = run_small(&["--preset", "no-such-thing"], &d.join("x"));
    assert_eq!(code, 2);
    assert!(err.contains("no-such-thing") && err.contains("gas-uncompensated"), "{err}");
    let (code, _, err) = logtrim(&["simulate", "--preset", "gas-uncompensated"]);
    assert_eq!(code, 2);
    assert!(err.contains("--out-dir"), "{err}");
    let bad = d.join("bad.json");
    std::fs::write(&bad, "{\"name\": \"x\", \"pair\": 3}").unwrap();
    let (code, _, err) = run_small(&["--frontend", bad.to_str().unwrap()], &d.join("y"));
    assert_eq!(code, 2);
    assert!(err.contains("bad.json") && err.contains("line 1"), "{err}");
    let z = d.join("z");
    let (code, _, err) = logtrim(&[
        "simulate",
        "--preset",
        "gas-uncompensated",
        "--setpoints",
        "1",
        "--out-dir",
        z.to_str().unwrap(),
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("set-points = 1"), "{err}");
    // Nothing was written for the refused runs.
    assert!(!d.join("x").exists() && !d.join("y").exists() && !d.join("z").exists());
    let (code, out, _) = logtrim(&["simulate", "--list-presets"]);
    assert_eq!(code, 0);
    assert!(out.contains("photometer-compensated") && out.contains("gas-uncompensated"));
    std::fs::remove_dir_all(&d).unwrap();
}
