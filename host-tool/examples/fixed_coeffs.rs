//! Writes the hand-made units used by the fixed-path tests as calibration files, for trying the CLI:
//! `cargo run -p logtrim-host --example fixed_coeffs -- DIR` writes `DIR/<name>.json`.

#[path = "../tests/common/units.rs"]
mod units;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = std::env::args().nth(1).ok_or("usage: fixed_coeffs DIR")?;
    std::fs::create_dir_all(&dir)?;
    for (name, cal) in units::all() {
        let file = logtrim_host::calfile::CalFile::new(cal, Some(format!("demo-{name}")));
        let path = std::path::Path::new(&dir).join(format!("{name}.json"));
        file.save(&path)?;
        println!("{}", path.display());
    }
    Ok(())
}
