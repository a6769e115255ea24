//! What every CLI test needs: running the `logtrim` binary, its exit code and output, and scratch folders.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// Runs `logtrim ARGS` in the folder `dir`.
pub fn logtrim_in(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_logtrim")).args(args).current_dir(dir).output().expect("the binary runs")
}

/// Runs `logtrim ARGS` and returns its exit code (-1 if it was killed), standard output and standard error.
pub fn logtrim(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_logtrim")).args(args).output().expect("the binary runs");
    (code(&out), stdout(&out), stderr(&out))
}

/// Runs `logtrim` with the words of `line` (split at white space) followed by `more` (paths, which may hold
/// spaces).
pub fn logtrim_words(line: &str, more: &[&str]) -> (i32, String, String) {
    let mut args: Vec<&str> = line.split_whitespace().collect();
    args.extend_from_slice(more);
    logtrim(&args)
}

/// The divider, ADC, fault bands and valid range of the `photometer-ntc` preset's temperature channel (a
/// 10 kΩ NTC from the 12-bit ADC's input to ground, 10 kΩ to its reference), as `sensor settings` options.
pub const NTC_CHANNEL: &str =
    "--series 10k --placement low --bits 12 --open-margin 8 --short-margin 8 --min -40 --max 125";

/// The exit code of a run (-1 if it was killed).
pub fn code(o: &Output) -> i32 {
    o.status.code().unwrap_or(-1)
}

/// The standard output of a run, as text.
pub fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// The standard error of a run, as text.
pub fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// An empty scratch folder for one test, named for it and this process.
pub fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("logtrim-cli-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// A path as an argument.
pub fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

/// The names of the files in `dir`, sorted.
pub fn file_names(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

/// Writes the design of the preset `name` to `path` (`simulate --write-preset`).
pub fn write_preset(name: &str, path: &Path) {
    let (code, out, err) = logtrim(&["simulate", "--preset", name, "--write-preset", s(path)]);
    assert_eq!(code, 0, "{out}{err}");
}

/// The design of the preset `name` with `edit` applied to its JSON (a front end of the test's own), written
/// to `path`.
pub fn write_design(name: &str, path: &Path, edit: impl FnOnce(&mut serde_json::Value)) {
    write_preset(name, path);
    let mut v: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    edit(&mut v);
    std::fs::write(path, serde_json::to_string_pretty(&v).unwrap()).unwrap();
}
