//! `logtrim emit COEFFS.json --format rust|c|json -o FILE`: the unit's fixed-point tables for firmware;
//! `logtrim c-library -o DIR`: the C library the C unit data is for.

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
    /// C99 unit data (a `.c` file) for the C library that `logtrim c-library` writes.
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
    /// With `--format c`: the C name of the unit's `const ltrm_fixed` (its tables are named after it), so
    /// that several units or channels link into one program [default: unit_cal].
    #[arg(long, value_name = "NAME")]
    pub c_name: Option<String>,
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
    if args.c_name.is_some() && !matches!(args.format, FormatArg::C) {
        return Err(Failure::input("--c-name applies to --format c only"));
    }
    let c_name = match &args.c_name {
        Some(n) => emit::c::CName::new(n).map_err(Failure::input)?,
        None => emit::c::CName::default(),
    };
    let (file, tables) = load_tables(&args.coeffs, &args.tables)?;
    let format = match args.format {
        FormatArg::Rust => Format::Rust,
        FormatArg::C => Format::C,
        FormatArg::Json => Format::Json,
    };
    // The calibration file by its name alone: the output's bytes do not depend on the folder.
    let source = args.coeffs.file_name().map(|n| n.to_string_lossy().into_owned());
    let prov = Provenance { unit: file.unit.clone(), source };
    let text = match (&args.crate_path, format) {
        (Some(path), _) => emit::rust::render_with_crate(&tables, &prov, path),
        (None, Format::C) => {
            let identity = logtrim::field::fingerprint(&file.calibration)
                .map_err(|e| Failure::input(format!("{}: {e}", args.coeffs.display())))?;
            emit::c::render_unit(&tables, &prov, &c_name, identity)
        }
        (None, _) => emit::render(&tables, format, &prov),
    };
    logtrim_host::output::write_atomic(&args.output, text.as_bytes())
        .map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
    say!(
        "wrote {} ({} bytes of tables, {} of universal tables)",
        args.output.display(),
        tables.bytes(),
        logtrim::fixed::universal::BYTES
    );
    Ok(())
}

/// Arguments of `logtrim c-library`.
#[derive(Args, Debug)]
pub struct CLibraryArgs {
    /// The folder to write `ltrm.h` and `ltrm.c` into (it must exist).
    #[arg(short = 'o', long = "output")]
    pub output: PathBuf,
}

/// Runs `logtrim c-library`: both files, each written atomically.
pub fn run_c_library(args: &CLibraryArgs) -> Result<(), Failure> {
    crate::check_outputs(&[], &[], &[Some(&args.output)])?;
    let files = [("ltrm.h", emit::c::library_header()), ("ltrm.c", emit::c::library_source())];
    for (name, text) in &files {
        let path = args.output.join(name);
        logtrim_host::output::write_atomic(&path, text.as_bytes())
            .map_err(|e| Failure::input(format!("{}: {e}", path.display())))?;
    }
    say!("wrote ltrm.h and ltrm.c into {}", args.output.display());
    Ok(())
}
