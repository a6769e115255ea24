//! Every public entry point of logtrim, for the link-time panic check.
#![no_std]
#![no_main]

use logtrim_panic_check::*;

entry!({
    f32_path::run();
    fixed_path::run();
    sensors::run();
    images::run();
    field::run();
    hal::run();
    misc::run();
    misc::layout_tables();
    //messages::run();
    hal::messages();
    canary();
});
