//! How a long model computation tells its caller how far it has come: the
//! comparison grid (one ML fit per model) and the imputations of a mapped
//! driver (one REML refit per draw) report each finished step through
//! [`FitProgress`]. The model stage only counts; drawing a bar, estimating the
//! time left and deciding whether anything is shown at all belong to the
//! caller (the command line implements it with a progress bar on a terminal).

/// Receives the progress of a counted task. Every method has an empty
/// default, so an implementation overrides only what it shows.
pub trait FitProgress: Sync {
    /// A task of `total` steps starts; `what` says in a few words what is
    /// counted (for example "comparison grid (ML fits)").
    fn begin(&self, what: &str, total: usize) {
        let _ = (what, total);
    }
    /// One more step of the current task is done.
    fn step(&self) {}
    /// The current task is over (also after an error part way).
    fn end(&self) {}
}

/// Shows nothing: for tests and for callers that do not show progress.
#[derive(Clone, Copy, Debug, Default)]
pub struct Silent;

impl FitProgress for Silent {}

/// Counts the steps of a task, reporting each to a [`FitProgress`], and ends
/// the task when dropped (so an early return by `?` still ends it).
pub struct Counter<'a> {
    progress: &'a dyn FitProgress,
}

impl<'a> Counter<'a> {
    /// Begin a task of `total` steps.
    pub fn begin(progress: &'a dyn FitProgress, what: &str, total: usize) -> Counter<'a> {
        progress.begin(what, total);
        Counter { progress }
    }

    /// One step done.
    pub fn step(&self) {
        self.progress.step();
    }
}

impl Drop for Counter<'_> {
    fn drop(&mut self) {
        self.progress.end();
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::sync::Mutex;

    #[derive(Default)]
    struct Log(Mutex<Vec<String>>);

    impl FitProgress for Log {
        fn begin(&self, what: &str, total: usize) {
            self.0.lock().unwrap().push(format!("begin {what} {total}"));
        }
        fn step(&self) {
            self.0.lock().unwrap().push("step".into());
        }
        fn end(&self) {
            self.0.lock().unwrap().push("end".into());
        }
    }

    #[test]
    fn counter_ends_the_task_even_on_early_return() {
        let log = Log::default();
        let run = |fail: bool| -> Result<(), ()> {
            let c = Counter::begin(&log, "grid", 3);
            c.step();
            if fail {
                return Err(());
            }
            c.step();
            Ok(())
        };
        assert!(run(true).is_err());
        assert_eq!(*log.0.lock().unwrap(), ["begin grid 3", "step", "end"]);
        log.0.lock().unwrap().clear();
        run(false).unwrap();
        assert_eq!(*log.0.lock().unwrap(), ["begin grid 3", "step", "step", "end"]);
    }
}
