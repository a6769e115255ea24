//! The `logtrim` command-line tool: a thin layer over the `logtrim-host` library.

fn main() {
    println!("logtrim {}", env!("CARGO_PKG_VERSION"));
}
