//! Writes the vector file that `targets/qemu` runs on an emulated core.
//!
//! Usage: make-vectors OUT [COEFFS.json] [SEED]
//! (default calibration: the dyeline unit's, default seed 17).

use std::path::PathBuf;
use std::process::ExitCode;

fn main() -> ExitCode {
    let mut args = std::env::args_os().skip(1);
    let Some(out) = args.next().map(PathBuf::from) else {
        eprintln!("usage: make-vectors OUT [COEFFS.json] [SEED]");
        return ExitCode::from(2);
    };
    let coeffs = args.next().map(PathBuf::from).unwrap_or_else(|| {
        PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../examples/dyeline/calibration/COEFFS.json")
    });
    let seed = match args.next().map(|s| s.to_string_lossy().parse::<u64>()) {
        None => 17,
        Some(Ok(s)) => s,
        Some(Err(e)) => {
            eprintln!("error: SEED must be an unsigned integer: {e}");
            return ExitCode::from(2);
        }
    };
    let bytes = match logtrim_vectors::generate::generate(&coeffs, seed) {
        Ok(b) => b,
        Err(e) => {
            eprintln!("error: {e}");
            return ExitCode::FAILURE;
        }
    };
    if let Err(e) = logtrim_host::output::write_atomic(&out, &bytes) {
        eprintln!("error: {}: {e}", out.display());
        return ExitCode::FAILURE;
    }
    let n = logtrim_vectors::format::Vectors::parse(&bytes).map(|v| v.len()).unwrap_or(0);
    println!("{}: {} bytes, {n} records (seed {seed})", out.display(), bytes.len());
    ExitCode::SUCCESS
}
