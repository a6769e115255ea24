//! Progress of a long job (a batch of units, a verification sweep), handed to the caller as it goes: the
//! library draws nothing itself. The `logtrim` command renders it as a progress bar on a terminal.

use std::sync::atomic::{AtomicU64, Ordering};

/// How far a job has got: `done` of `total` steps (units fitted, temperatures swept).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Progress {
    /// Steps finished so far.
    pub done: u64,
    /// Steps in the whole job.
    pub total: u64,
}

/// A receiver of progress. It is called once as the job starts (`done` 0) and once per finished step, from
/// whichever worker thread finished it, so `done` may arrive out of order; it must be quick.
pub type OnProgress<'a> = &'a (dyn Fn(Progress) + Sync);

/// A receiver that ignores progress.
pub fn quiet(_: Progress) {}

/// Counts finished steps and reports each to a receiver.
pub(crate) struct Counter<'a> {
    total: u64,
    done: AtomicU64,
    on: OnProgress<'a>,
}

impl<'a> Counter<'a> {
    /// Starts a job of `total` steps (and reports its start).
    pub(crate) fn start(total: usize, on: OnProgress<'a>) -> Counter<'a> {
        let total = total as u64;
        on(Progress { done: 0, total });
        Counter { total, done: AtomicU64::new(0), on }
    }

    /// One more step is finished.
    pub(crate) fn step(&self) {
        let done = self.done.fetch_add(1, Ordering::Relaxed) + 1;
        (self.on)(Progress { done, total: self.total });
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rayon::prelude::*;
    use std::sync::Mutex;

    #[test]
    fn every_step_is_reported_once_from_any_thread() {
        let seen = Mutex::new(Vec::new());
        let on = |p: Progress| seen.lock().unwrap().push(p);
        let c = Counter::start(100, &on);
        (0..100).into_par_iter().for_each(|_| c.step());
        let mut seen = seen.into_inner().unwrap();
        assert_eq!(seen[0], Progress { done: 0, total: 100 });
        seen.sort_by_key(|p| p.done);
        let dones: Vec<u64> = seen.iter().map(|p| p.done).collect();
        assert_eq!(dones, (0..=100).collect::<Vec<u64>>());
        assert!(seen.iter().all(|p| p.total == 100));
    }
}
