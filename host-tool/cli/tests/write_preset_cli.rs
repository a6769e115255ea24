//! `simulate --write-preset` names every key a front-end description may hold (the optional ones as null
//! where the preset has none) and reads back as the same description; `simulate --help` says when the field
//! runs' files appear.

mod common;

use common::{logtrim, scratch};
use logtrim_host::frontend::{preset, FrontEnd, PRESETS};

#[test]
fn write_preset_writes_every_key_and_reads_back_the_same() {
    let d = scratch("write-preset");
    for p in PRESETS {
        let path = d.join(format!("{}.json", p.name));
        let (code, out, err) =
            logtrim(&["simulate", "--preset", p.name, "--write-preset", path.to_str().unwrap()]);
        assert_eq!(code, 0, "{out}{err}");
        let v: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
        for key in FrontEnd::OPTIONAL_KEYS {
            assert!(v.get(key).is_some(), "{}: no {key:?} key", p.name);
        }
        assert_eq!(FrontEnd::load(&path).unwrap(), preset(p.name).unwrap(), "{}", p.name);
    }
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn simulate_help_says_when_standards_and_blank_appear() {
    let (code, out, _) = logtrim(&["simulate", "--help"]);
    assert_eq!(code, 0);
    let flat = out.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(flat.contains("for a front end with an `aging` key"), "{out}");
    assert!(flat.contains("standards.csv") && flat.contains("blank.csv"), "{out}");
    assert!(flat.contains("every key included"), "{out}");
}
