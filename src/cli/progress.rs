//! Progress on standard error: a spinner with the stage for one file, a bar for
//! window-by-window verification and for batch runs; drawn only on a terminal
//! (indicatif hides it otherwise), with plain lines per finished job in a batch.

use std::path::Path;

/// Progress of a batch run: a bar on a terminal (jobs done, rate, time left, the
/// file being worked on), one plain line per finished job otherwise.
pub(super) struct BatchProgress {
    bar: indicatif::ProgressBar,
    done: std::sync::atomic::AtomicUsize,
    total: std::sync::atomic::AtomicUsize,
}

impl BatchProgress {
    pub(super) fn new() -> BatchProgress {
        let bar = indicatif::ProgressBar::new(0);
        let style = indicatif::ProgressStyle::with_template(
            "[{bar:30}] {pos}/{len} jobs, {per_sec}, {eta} left  {wide_msg}",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar());
        bar.set_style(style);
        bar.enable_steady_tick(std::time::Duration::from_millis(200));
        BatchProgress {
            bar,
            done: Default::default(),
            total: Default::default(),
        }
    }

    pub(super) fn event(&self, e: tutti::batch::Event) {
        use std::sync::atomic::Ordering;
        use tutti::batch::Event;
        match e {
            Event::Planned { total, skipped } => {
                self.total.store(total - skipped, Ordering::Relaxed);
                self.bar.set_length((total - skipped) as u64);
                if skipped > 0 {
                    self.bar.suspend(|| {
                        eprintln!("{skipped} of {total} job(s) finished before with the same inputs and options: skipped")
                    });
                }
            }
            Event::Started { key, setting } => {
                self.bar.set_message(format!("{key} ({setting})"));
            }
            Event::Finished { row } => {
                let done = self.done.fetch_add(1, Ordering::Relaxed) + 1;
                self.bar.inc(1);
                if self.bar.is_hidden() {
                    let what = match &row.error {
                        Some(e) => format!("FAILED: {e}"),
                        None => format!(
                            "{} in {:.2} s",
                            row.status.name(),
                            row.compile_s + row.verify_s
                        ),
                    };
                    eprintln!(
                        "[{done}/{}] {} ({}): {what}",
                        self.total.load(Ordering::Relaxed),
                        row.path,
                        row.setting
                    );
                }
            }
        }
    }

    pub(super) fn finish(&self) {
        self.bar.finish_and_clear();
    }
}

/// A spinner on stderr with the stage and the time so far; drawn only when stderr is
/// a terminal (indicatif hides it otherwise, so logs and pipes stay clean).
pub(super) struct Progress(pub(super) indicatif::ProgressBar);

impl Progress {
    pub(super) fn start(file: &Path) -> Progress {
        let bar = indicatif::ProgressBar::new_spinner();
        let style =
            indicatif::ProgressStyle::with_template("{spinner} {prefix}: {msg} ({elapsed})")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_spinner());
        bar.set_style(style);
        bar.set_prefix(file.display().to_string());
        bar.enable_steady_tick(std::time::Duration::from_millis(120));
        Progress(bar)
    }

    pub(super) fn stage(&self, what: &str) {
        self.0.set_message(what.to_string());
    }

    /// Until `finished`, shows the work `counter` reports done (in `unit`s) as a bar
    /// with the fraction and the time left, once there is work to count.
    pub(super) fn follow(
        &self,
        counter: &tutti::sim::WorkCounter,
        finished: &std::sync::atomic::AtomicBool,
        unit: &str,
    ) {
        use std::sync::atomic::Ordering;
        let mut shown_total = 0;
        while !finished.load(Ordering::Relaxed) {
            std::thread::sleep(std::time::Duration::from_millis(100));
            let total = counter.total.load(Ordering::Relaxed);
            if total == 0 {
                continue;
            }
            if total != shown_total {
                let template = format!(
                    "{{prefix}}: {{msg}} [{{bar:30}}] {{pos}}/{{len}} {unit}, {{percent}}%, {{eta}} left"
                );
                let style = indicatif::ProgressStyle::with_template(&template)
                    .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar());
                self.0.set_style(style);
                self.0.set_length(total as u64);
                shown_total = total;
            }
            self.0
                .set_position(counter.done.load(Ordering::Relaxed) as u64);
        }
    }

    pub(super) fn clear(&self) {
        self.0.finish_and_clear();
    }

    /// Clears the spinner and passes an error on.
    pub(super) fn cleared<E>(&self, e: E) -> E {
        self.clear();
        e
    }
}
