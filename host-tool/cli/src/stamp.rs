//! The time stamped into calibration files and field records: now, or `SOURCE_DATE_EPOCH` when it is set
//! (the reproducible-builds convention), so that remaking the same outputs gives the same bytes.

/// The environment variable of the reproducible-builds convention: a Unix time, in seconds, that takes the
/// place of "now" in everything logtrim stamps (calibration files, and so images; field records).
pub const SOURCE_DATE_EPOCH: &str = "SOURCE_DATE_EPOCH";

/// "Now" for a stamp: [`SOURCE_DATE_EPOCH`] when it is set, else the system clock. A set but malformed
/// value is an error that names it (`main` checks this before any command runs).
pub fn checked() -> Result<u64, String> {
    match std::env::var(SOURCE_DATE_EPOCH) {
        Ok(v) => v.trim().parse::<u64>().map_err(|_| {
            format!("{SOURCE_DATE_EPOCH} is {v:?}: expected a whole number of seconds since 1970-01-01 UTC")
        }),
        Err(std::env::VarError::NotPresent) => Ok(logtrim_host::calfile::now_unix_s()),
        Err(std::env::VarError::NotUnicode(_)) => {
            Err(format!("{SOURCE_DATE_EPOCH} is not valid text: expected a whole number of seconds"))
        }
    }
}

/// "Now" for a stamp, after `main` has refused a malformed [`SOURCE_DATE_EPOCH`].
pub fn now() -> u64 {
    checked().unwrap_or_else(|_| logtrim_host::calfile::now_unix_s())
}
