//! `logtrim emit COEFFS.json --format rust|c|json -o FILE`: the unit's fixed-point tables for firmware.

use std::path::PathBuf;

use clap::builder::TypedValueParser as _;
use clap::{Args, ValueEnum};
use logtrim_host::calfile::CalFile;
use logtrim_host::emit::rust::CratePath;
use logtrim_host::emit::{self, Format, Provenance};
use logtrim_host::tables::{self, TableOptions};

use crate::Failure;

/// Sizes of the generated tables (shared by `emit` and `verify`).
#[derive(Args, Debug, Clone)]
pub struct TableArgs {
    /// Knots of the temperature grid.
    #[arg(long, default_value_t = TableOptions::default().t_knots,
          value_parser = clap::value_parser!(u16).range(4..=1000).map(usize::from))]
    pub t_knots: usize,
    /// Knots of the residual's x̃ grid.
    #[arg(long, default_value_t = TableOptions::default().xa_knots,
          value_parser = clap::value_parser!(u16).range(4..=4000).map(usize::from))]
    pub xa_knots: usize,
    /// Largest number of segments of a temperature-sensor table.
    #[arg(long, default_value_t = TableOptions::default().sensor_segments,
          value_parser = clap::value_parser!(u32).range(1..=65536).map(|n| n as usize))]
    pub sensor_segments: usize,
}

impl TableArgs {
    /// The library's options.
    pub fn options(&self) -> TableOptions {
        TableOptions {
            t_knots: self.t_knots,
            xa_knots: self.xa_knots,
            sensor_segments: self.sensor_segments,
            ..TableOptions::default()
        }
    }
}

/// Output formats.
#[derive(ValueEnum, Debug, Clone, Copy)]
pub enum FormatArg {
    /// Rust source of `const` items, for `include!` from a build script's OUT_DIR.
    Rust,
    /// A C99 header with the tables and an integer-only evaluator.
    C,
    /// JSON of the tables.
    Json,
}

/// Arguments of `logtrim emit`.
#[derive(Args, Debug)]
pub struct EmitArgs {
    /// The calibration file.
    pub coeffs: PathBuf,
    /// Output format.
    #[arg(long, value_enum)]
    pub format: FormatArg,
    /// Output file (written atomically).
    #[arg(short = 'o', long = "output")]
    pub output: PathBuf,
    /// With `--format rust`: the path the generated code names the firmware crate by, for a firmware that
    /// renames the dependency or re-exports it (e.g. `lt`, `crate::deps::logtrim`) [default: logtrim].
    #[arg(long, value_name = "PATH")]
    pub crate_path: Option<CratePath>,
    #[command(flatten)]
    pub tables: TableArgs,
}

/// Loads a calibration file and builds its tables (shared with `verify`).
pub fn load_tables(
    coeffs: &std::path::Path,
    t: &TableArgs,
) -> Result<(CalFile, tables::FixedTables), Failure> {
    let file = CalFile::load(coeffs).map_err(Failure::input)?;
    // A raw temperature channel described in the file gets its code → temperature table too.
    let tables =
        file.fixed_tables(&t.options()).map_err(|e| Failure::input(format!("{}: {e}", coeffs.display())))?;
    Ok((file, tables))
}

/// Runs `logtrim emit`.
pub fn run(args: &EmitArgs) -> Result<(), Failure> {
    if args.crate_path.is_some() && !matches!(args.format, FormatArg::Rust) {
        return Err(Failure::input("--crate-path applies to --format rust only"));
    }
    crate::check_outputs(&[Some(&args.coeffs)], &[Some(&args.output)], &[])?;
    let (file, tables) = load_tables(&args.coeffs, &args.tables)?;
    let format = match args.format {
        FormatArg::Rust => Format::Rust,
        FormatArg::C => Format::C,
        FormatArg::Json => Format::Json,
    };
    let prov = Provenance { unit: file.unit.clone(), source: Some(args.coeffs.display().to_string()) };
    let text = match &args.crate_path {
        Some(path) => emit::rust::render_with_crate(&tables, &prov, path),
        None => emit::render(&tables, format, &prov),
    };
    logtrim_host::output::write_atomic(&args.output, text.as_bytes())
        .map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
    note!(
        "logtrim: wrote {} ({} bytes of tables, {} of universal tables)",
        args.output.display(),
        tables.bytes(),
        logtrim::fixed::universal::BYTES
    );
    Ok(())
}
