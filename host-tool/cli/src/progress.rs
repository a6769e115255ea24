//! Progress bars on the terminal for the library's long jobs (it reports progress; this draws it).

use indicatif::{ProgressBar, ProgressStyle};
use logtrim_host::progress::Progress;

/// A progress bar drawn with `template` (indicatif's), or none when `shown` is false (output is not a
/// terminal). The bar learns its length from the first report.
pub fn bar(template: &str, shown: bool) -> Option<ProgressBar> {
    shown.then(|| {
        let b = ProgressBar::new(0);
        b.set_style(ProgressStyle::with_template(template).unwrap_or_else(|_| ProgressStyle::default_bar()));
        b
    })
}

/// The receiver that moves `bar` (nothing without a bar).
pub fn on(bar: &Option<ProgressBar>) -> impl Fn(Progress) + Sync + '_ {
    move |p: Progress| {
        if let Some(b) = bar {
            b.set_length(p.total);
            if p.done > 0 {
                b.inc(1);
            }
        }
    }
}

/// Clears the bar from the terminal.
pub fn finish(bar: Option<ProgressBar>) {
    if let Some(b) = bar {
        b.finish_and_clear();
    }
}
