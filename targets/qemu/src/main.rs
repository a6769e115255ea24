//! logtrim's core arithmetic on an emulated Cortex-M, compared bit for bit with the host's.
//!
//! The vector file (made on the host from the same firmware crate: `logtrim-vectors`) is included at build
//! time. The binary loads the units from their images as a firmware does, runs every record's evaluation,
//! compares its outcome (the main value's bits and the digest of the whole result) with the host's, prints
//! each mismatch and a summary by semihosting, and ends the emulator with exit code 0 (all equal) or 1.
//!
//! Run by `scripts/qemu-tests.sh` (thumbv6m on a Cortex-M3 machine, soft float; thumbv7em-none-eabihf on a
//! Cortex-M4 machine with its FPU).
#![no_std]
#![no_main]
#![forbid(unsafe_code)]

use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use logtrim::image::DefaultFixedStorage;
use logtrim_vectors::eval::{self, Kind};
use logtrim_vectors::format::Vectors;
use panic_semihosting as _;

static VECTORS: &[u8] = include_bytes!(env!("LOGTRIM_VECTORS"));

/// Mismatches printed in full; the rest are counted.
const SHOWN: u32 = 20;

fn fail(what: &str) -> ! {
    hprintln!("error: {}", what);
    debug::exit(debug::EXIT_FAILURE);
    #[allow(clippy::empty_loop)]
    loop {}
}

#[entry]
fn main() -> ! {
    let vectors = match Vectors::parse(VECTORS) {
        Ok(v) => v,
        Err(e) => {
            hprintln!("error: the vector file is malformed: {:?}", e);
            fail("vector file")
        }
    };
    let [img0, img1] = vectors.images() else { fail("the vector file must carry exactly two images") };
    let (mut s0, mut s1) = (DefaultFixedStorage::new(), DefaultFixedStorage::new());
    let units = match (eval::load(img0, &mut s0), eval::load(img1, &mut s1)) {
        (Ok(a), Ok(b)) => [a, b],
        (a, b) => {
            hprintln!("error: a unit's image does not load on the target: {:?} / {:?}", a.err(), b.err());
            fail("units")
        }
    };

    let (mut passed, mut failed) = (0u32, 0u32);
    let mut per_kind = [0u32; Kind::ALL.len()];
    for (i, r) in vectors.records().enumerate() {
        let Some(kind) = Kind::from_code(r.kind) else {
            hprintln!("record {}: unknown kind {}", i, r.kind);
            failed += 1;
            continue;
        };
        let got = eval::eval(kind, &r.input, &units, vectors.images());
        match got {
            Some(o) if o.primary == r.primary && o.digest == r.digest => passed += 1,
            _ => {
                failed += 1;
                if let Some(n) = Kind::ALL.iter().position(|k| *k == kind).and_then(|p| per_kind.get_mut(p)) {
                    *n += 1;
                }
                if failed <= SHOWN {
                    hprintln!(
                        "MISMATCH record {} {:?} input {:08x?}: target {:x?}, host primary {:#x} digest {:#x}",
                        i,
                        kind,
                        r.input,
                        got,
                        r.primary,
                        r.digest
                    );
                }
            }
        }
    }
    for (kind, n) in Kind::ALL.iter().zip(per_kind) {
        if n > 0 {
            hprintln!("{:?}: {} mismatches", kind, n);
        }
    }
    hprintln!("{} passed, {} failed", passed, failed);
    debug::exit(if failed == 0 && passed > 0 { debug::EXIT_SUCCESS } else { debug::EXIT_FAILURE });
    #[allow(clippy::empty_loop)]
    loop {}
}
