//! The JSON Schemas in `schemas/` against the files the tool reads: every shipped example and every file the
//! tool writes and reads back validates against its schema (with a validator from the registry, not one of
//! ours: boon), and every key a schema names is a key its type serialises, and the other way round.

mod common;

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use common::{logtrim, logtrim_words, scratch, NTC_CHANNEL};
use logtrim_host::frontend::{preset, Aging, ChamberFaults, PRESETS};
use serde_json::Value;

/// Where the schemas say they live: a schema's `$ref` to another file resolves against it.
const BASE: &str = "https://codeberg.org/logtrim/logtrim/schemas/";

/// The schema of every JSON file the tool reads.
const SCHEMAS: [&str; 5] = ["acceptance", "calibration", "frontend", "population", "sensor"];

fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../..")
}

fn read_json(path: &Path) -> Value {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn schema(name: &str) -> Value {
    read_json(&root().join(format!("schemas/{name}.schema.json")))
}

/// Validators of every schema, with the schemas registered under their `$id` for the references between them.
struct Validators(boon::Schemas, Vec<(&'static str, boon::SchemaIndex)>);

impl Validators {
    fn new() -> Validators {
        let mut compiler = boon::Compiler::new();
        for name in SCHEMAS {
            compiler.add_resource(&format!("{BASE}{name}.schema.json"), schema(name)).expect("registers");
        }
        let mut schemas = boon::Schemas::new();
        let index = SCHEMAS
            .iter()
            .map(|name| {
                let i = compiler
                    .compile(&format!("{BASE}{name}.schema.json"), &mut schemas)
                    .unwrap_or_else(|e| panic!("schemas/{name}.schema.json: {e}"));
                (*name, i)
            })
            .collect();
        Validators(schemas, index)
    }

    /// What the schema `name` finds wrong with `value`, each with its place.
    fn errors(&self, name: &str, value: &Value) -> Vec<String> {
        let (_, i) = self.1.iter().find(|(n, _)| *n == name).expect("a schema of that name");
        match self.0.validate(value, *i) {
            Ok(()) => Vec::new(),
            Err(e) => format!("{e}").lines().map(str::to_string).collect(),
        }
    }

    /// Asserts that `value` (named `what` in the message) is valid against the schema `name`.
    fn check(&self, name: &str, value: &Value, what: &str) {
        let errors = self.errors(name, value);
        assert!(errors.is_empty(), "{what} against schemas/{name}.schema.json:\n{}", errors.join("\n"));
    }

    fn check_file(&self, name: &str, path: &Path) {
        self.check(name, &read_json(path), &path.display().to_string());
    }
}

/// The schema a shipped JSON file is read with, by its name; `None` for a file no verb reads.
fn schema_of_file(file: &str) -> Option<&'static str> {
    match file {
        "frontend.json" => Some("frontend"),
        "COEFFS.json" | "coeffs.json" | "unit.json" => Some("calibration"),
        "ntc.json" => Some("sensor"),
        // What generated a simulation's files: written for people, read by no verb.
        "manifest.json" => None,
        other => panic!("{other}: a shipped JSON file of no known kind; give it its schema here"),
    }
}

fn json_files(dir: &Path, out: &mut Vec<PathBuf>) {
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() && p.file_name().is_some_and(|n| n != "target") {
            json_files(&p, out);
        } else if p.extension().is_some_and(|x| x == "json") {
            out.push(p);
        }
    }
}

#[test]
fn every_shipped_example_validates_against_its_schema() {
    let v = Validators::new();
    let mut files = Vec::new();
    json_files(&root().join("examples"), &mut files);
    json_files(&root().join("fuzz/seeds"), &mut files);
    let mut checked = 0;
    for f in &files {
        if let Some(name) = schema_of_file(f.file_name().unwrap().to_str().unwrap()) {
            v.check_file(name, f);
            checked += 1;
        }
    }
    // The worked example's two descriptions and its calibration, the fuzz seeds' front end, sensor and two
    // calibrations.
    assert!(checked >= 7, "{checked} files of {files:?}");
}

#[test]
fn a_key_the_readers_refuse_the_schemas_refuse() {
    let v = Validators::new();
    let fe = root().join("examples/dyeline/frontend.json");
    let mut bad = read_json(&fe);
    bad["adc"]["bitz"] = 12.into();
    let errors = v.errors("frontend", &bad);
    assert!(errors.iter().any(|e| e.contains("bitz")), "{errors:?}");
    let e = logtrim_host::frontend::FrontEnd::from_json(&bad.to_string(), "fe.json").unwrap_err().to_string();
    assert!(e.contains("bitz"), "{e}");
    let mut bad = read_json(&root().join("fuzz/seeds/design_json/ntc.json"));
    bad["element"]["ntc_beta"]["beta"] = 3900.into();
    let errors = v.errors("sensor", &bad);
    assert!(errors.iter().any(|e| e.contains("beta")), "{errors:?}");
    assert!(logtrim_host::sensor_tool::settings_from_json(&bad.to_string(), "s.json").is_err());
}

#[test]
fn the_files_the_tool_writes_and_reads_validate_against_their_schemas() {
    let v = Validators::new();
    let d = scratch("schemas");
    let p = |name: &str| d.join(name).to_str().unwrap().to_string();
    // Every preset as `--write-preset` writes it (every key, the optional ones as null).
    for pr in PRESETS {
        let (code, _, err) = logtrim(&["simulate", "--preset", pr.name, "--write-preset", &p("preset.json")]);
        assert_eq!(code, 0, "{err}");
        v.check_file("frontend", &d.join("preset.json"));
    }
    // The demo's folders: each preset's front end and calibration (a raw channel's carries its sensor).
    let (code, _, err) = logtrim(&["demo", "--out-dir", &p("demo"), "--validation", "200"]);
    assert_eq!(code, 0, "{err}");
    for pr in PRESETS {
        v.check_file("frontend", &d.join("demo").join(pr.name).join("frontend.json"));
        v.check_file("calibration", &d.join("demo").join(pr.name).join("coeffs.json"));
    }
    let ntc = read_json(&d.join("demo/photometer-ntc/coeffs.json"));
    assert!(ntc["temperature_sensor"].is_object(), "the raw channel's calibration carries its sensor");
    // Sensor settings of each element.
    for element in ["--beta 3900 --r0 10k", "--sh 1.1301956e-3,2.3396096e-4,8.826229e-8", "--rtd pt1000"] {
        let (code, _, err) =
            logtrim_words(&format!("sensor settings {element} {NTC_CHANNEL}"), &["-o", &p("sensor.json")]);
        assert_eq!(code, 0, "{element}: {err}");
        v.check_file("sensor", &d.join("sensor.json"));
    }
    // A lot characterised and units fitted against it: the population file and the units' calibration
    // files, judged (with their verdicts) and with the sensor.
    std::fs::write(
        d.join("ntc.json"),
        read_json(&d.join("demo/photometer-ntc/frontend.json"))["temperature_sensor"]["sensor"].to_string(),
    )
    .unwrap();
    let sim = |units: &str, at: &[&str], out: &str| {
        let mut args = vec!["simulate", "--preset", "photometer-ntc", "--units", units];
        args.extend_from_slice(at);
        let out = p(out);
        args.extend_from_slice(&["--ratios", "9", "--repeats", "1", "--validation", "1", "--out-dir", &out]);
        let (code, _, err) = logtrim(&args);
        assert_eq!(code, 0, "{err}");
    };
    sim("8", &["--setpoints", "5"], "lot");
    let (code, out, err) =
        logtrim(&["characterise", &p("lot/cal.csv"), "--sensor", &p("ntc.json"), "-o", &p("pop.json")]);
    assert_eq!(code, 0, "{out}{err}");
    v.check_file("population", &d.join("pop.json"));
    sim("2", &["--setpoints-at", "0,35,70"], "line");
    let fit = format!("fit {} --population {} --sensor {}", p("line/cal.csv"), p("pop.json"), p("ntc.json"));
    let (code, out, err) = logtrim_words(&fit, &["-o", &p("units")]);
    assert!(code == 0 || code == 3, "{out}{err}");
    let mut units = Vec::new();
    json_files(&d.join("units"), &mut units);
    let judged: Vec<_> = units.iter().filter(|f| !f.ends_with("summary.json")).collect();
    assert_eq!(judged.len(), 2, "{units:?}");
    for f in judged {
        v.check_file("calibration", f);
        assert!(read_json(f)["acceptance"]["verdict"].is_string(), "{}", f.display());
    }
    std::fs::remove_dir_all(&d).unwrap();
}

/// A schema node with its references within the file (`#/$defs/…`) followed; a reference to another schema
/// file stays as it is (that file's keys are checked on their own).
fn local<'a>(node: &'a Value, root: &'a Value) -> &'a Value {
    match node.get("$ref").and_then(Value::as_str).and_then(|r| r.strip_prefix('#')) {
        Some(pointer) => {
            local(root.pointer(pointer).unwrap_or_else(|| panic!("#{pointer}: no such definition")), root)
        }
        None => node,
    }
}

/// Walks `value` along its schema: every key it has must be a property there (recorded in `seen`, by path).
fn walk(node: &Value, root: &Value, value: &Value, path: &str, seen: &mut BTreeSet<String>) {
    let node = local(node, root);
    if let Some(branches) = node.get("oneOf").and_then(Value::as_array) {
        let k = branches
            .iter()
            .position(|b| {
                let b = local(b, root);
                match (b.pointer("/properties/kind/const"), value) {
                    (_, Value::Null) => b["type"] == "null",
                    (Some(kind), _) => value.get("kind") == Some(kind),
                    (None, _) => b["type"] != "null",
                }
            })
            .unwrap_or_else(|| panic!("{path}: {value} fits no branch"));
        return walk(&branches[k], root, value, &format!("{path}[{k}]"), seen);
    }
    match value {
        Value::Object(map) => {
            let Some(props) = node.get("properties").and_then(Value::as_object) else { return };
            for (key, x) in map {
                let sub =
                    props.get(key).unwrap_or_else(|| panic!("{path}.{key}: serialised, not in the schema"));
                seen.insert(format!("{path}.{key}"));
                walk(sub, root, x, &format!("{path}.{key}"), seen);
            }
        }
        Value::Array(items) => {
            if let Some(item) = node.get("items") {
                for x in items {
                    walk(item, root, x, &format!("{path}[]"), seen);
                }
            }
        }
        _ => {}
    }
}

/// Every property path of a schema (following its own references, and each `oneOf` branch).
fn property_paths(node: &Value, root: &Value, path: &str, out: &mut BTreeSet<String>) {
    let node = local(node, root);
    for (k, b) in node.get("oneOf").and_then(Value::as_array).into_iter().flatten().enumerate() {
        property_paths(b, root, &format!("{path}[{k}]"), out);
    }
    for (key, sub) in node.get("properties").and_then(Value::as_object).into_iter().flatten() {
        out.insert(format!("{path}.{key}"));
        property_paths(sub, root, &format!("{path}.{key}"), out);
    }
    if let Some(item) = node.get("items") {
        property_paths(item, root, &format!("{path}[]"), out);
    }
}

/// Asserts that the values, serialised by the type that reads the file, use every key of the schema `name`
/// and no other.
fn assert_keys_match(name: &str, values: &[Value]) {
    let root = schema(name);
    let mut seen = BTreeSet::new();
    for v in values {
        walk(&root, &root, v, "", &mut seen);
    }
    let mut all = BTreeSet::new();
    property_paths(&root, &root, "", &mut all);
    let unused: Vec<_> = all.difference(&seen).collect();
    assert!(
        unused.is_empty(),
        "schemas/{name}.schema.json names keys the type does not serialise: {unused:?}"
    );
}

#[test]
fn each_schemas_keys_are_the_keys_its_type_serialises() {
    use logtrim::sensor::{SensorElement, TemperatureSensor};
    use logtrim_host::calfile::CalFile;
    // (The acceptance limits' and the population file's schemas have their key tests beside their types.)
    // Front ends: a digital and a raw channel, each with every optional part.
    let frontends: Vec<Value> = ["photometer-compensated", "photometer-ntc"]
        .into_iter()
        .map(|name| {
            let mut fe = preset(name).unwrap();
            fe.spread = Some(fe.spread.unwrap_or_default());
            fe.aging = Some(Aging { output_offset_v: 1e-3, gain_factor: 1.001 });
            fe.chamber_faults = Some(ChamberFaults::default());
            serde_json::to_value(&fe).unwrap()
        })
        .collect();
    assert_keys_match("frontend", &frontends);
    // Sensors: each element.
    let raw = preset("photometer-ntc").unwrap().firmware_sensor().unwrap();
    let sensors: Vec<Value> = [
        raw.element,
        SensorElement::NtcSteinhartHart(logtrim::thermistor::SteinhartHart { a: 1e-3, b: 2e-4, c: 1e-7 }),
        SensorElement::Rtd(logtrim::rtd::Rtd::PT1000),
    ]
    .into_iter()
    .map(|element| serde_json::to_value(TemperatureSensor { element, ..raw }).unwrap())
    .collect();
    assert_keys_match("sensor", &sensors);
    // A calibration file with every part: the worked example's, with a sensor and a verdict.
    let mut file = CalFile::load(&root().join("examples/dyeline/calibration/COEFFS.json")).unwrap();
    file.temperature_sensor = Some(raw);
    file.acceptance = Some(serde_json::json!({ "verdict": "PASS" }));
    assert!(file.fit.is_some());
    assert_keys_match("calibration", &[serde_json::to_value(&file).unwrap()]);
}
