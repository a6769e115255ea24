#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| logtrim_fuzz::check_fit(data));
