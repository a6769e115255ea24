//! Link-time proof that no public entry point of `logtrim` can reach a panic on a real target.
//!
//! Every function here calls a part of the public API with inputs the optimiser cannot see
//! ([`core::hint::black_box`]), and hands every result back to `black_box`, so that nothing is
//! constant-folded or dropped. The binaries in `src/bin/` call them from their entry point and are linked
//! as release builds for `thumbv6m-none-eabi` and `thumbv7em-none-eabihf`.
//!
//! The panic handler calls a function that exists nowhere. A panic path that survives optimisation keeps
//! the handler alive, and the link fails with an undefined symbol named
//! `logtrim_panic_check_found_a_reachable_panic`. `scripts/panic-check.sh` then links again with the
//! `locate` feature (a handler that loops) and prints the source location of each call into the panic
//! machinery, inlined frames included.
//!
//! The `Display` messages of the error types are covered too ([`messages`], [`hal::messages`]), as a
//! firmware that logs over `core::fmt` prints them, and so are the layout tables rendered for the docs.
//!
//! Not covered:
//! * the host's f64 reference of the calibration (`correct_f64`, `reference_sweep`, …, the crate's
//!   `reference` feature): host-only, not a firmware entry point, and a firmware build does not enable it;
//! * `Debug` formatting, and the messages of the two errors that print an f32 (`filter::InvalidTimeConstant`
//!   and the limits in `field::FieldError`): core's own formatting of `str` in `Debug` and of floats
//!   (`core::num::flt2dec`) keeps panic paths that no caller can remove;
//! * the `serde` and `defmt` derives (exercised by serialisers and loggers, not by the firmware's
//!   arithmetic).
#![no_std]
#![deny(unsafe_code)]

pub mod f32_path;
pub mod field;
pub mod fixed_path;
pub mod hal;
pub mod images;
pub mod messages;
pub mod misc;
pub mod sensors;

/// A value the optimiser must treat as unknown.
#[inline(always)]
pub fn o<T>(v: T) -> T {
    core::hint::black_box(v)
}

/// Keeps a result alive: the optimiser must assume it is read.
#[inline(always)]
pub fn keep<T>(v: T) {
    core::hint::black_box(v);
}

/// Bytes the optimiser knows nothing about: images, records and tables are parsed from them.
pub static BYTES: [u8; 4096] = [0; 4096];

/// A 16-bit-range table the optimiser knows nothing about.
pub static I32S: [i32; 1024] = [0; 1024];

/// The same for i16 tables.
pub static I16S: [i16; 1024] = [0; 1024];

/// Opaque bytes of an opaque length.
#[inline(always)]
pub fn bytes() -> &'static [u8] {
    o(&BYTES[..])
}

/// Opaque i32 values.
#[inline(always)]
pub fn i32s() -> &'static [i32] {
    o(&I32S[..])
}

/// Opaque i16 values.
#[inline(always)]
pub fn i16s() -> &'static [i16] {
    o(&I16S[..])
}

/// With the `canary` feature, a panic path the optimiser cannot remove (`clamp` asserts `min <= max`).
#[inline(never)]
pub fn canary() {
    #[cfg(feature = "canary")]
    keep(o(5i64).clamp(o(0), o(9)));
}

/// The entry point of a check binary: runs `$body` once, then parks.
#[macro_export]
macro_rules! entry {
    ($body:expr) => {
        #[allow(unsafe_code)] // `no_mangle`: the linker's entry symbol
        #[no_mangle]
        pub extern "C" fn _start() -> ! {
            $body;
            #[allow(clippy::empty_loop)]
            loop {}
        }
    };
}

#[cfg(not(feature = "locate"))]
#[panic_handler]
fn panic(_info: &core::panic::PanicInfo<'_>) -> ! {
    extern "Rust" {
        // Defined nowhere: any panic path that survives optimisation fails the link with this name.
        fn logtrim_panic_check_found_a_reachable_panic() -> !;
    }
    #[allow(unsafe_code)] // an undefined extern function, never called at run time: the link fails first
    unsafe {
        logtrim_panic_check_found_a_reachable_panic()
    }
}

#[cfg(feature = "locate")]
#[panic_handler]
#[inline(never)]
fn panic(_info: &core::panic::PanicInfo<'_>) -> ! {
    #[allow(clippy::empty_loop)]
    loop {}
}
