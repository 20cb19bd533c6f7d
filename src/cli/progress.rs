/*!
Progress and cancellation of the long commands in the terminal.

- [`Bar`]: a progress line on stderr with the count, the rate and the time
  left (indicatif), drawn only when stderr is a terminal (scripts and logs
  get the final summary line only).
- [`cancel_on_interrupt`]: the first Ctrl-C (SIGINT) or SIGTERM asks the
  running command to stop at its next safe point — after the chunk of
  objects in hand, with everything finished so far written through the
  atomic path and a run later carrying on from there; a second Ctrl-C ends
  the process at once (exit status 130).
*/
use std::io::IsTerminal;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

/// Set by the first SIGINT or SIGTERM.
static INTERRUPTED: std::sync::OnceLock<Arc<AtomicBool>> = std::sync::OnceLock::new();

/// Install the handlers (once) and return the flag they set.
pub fn cancel_on_interrupt() -> &'static AtomicBool {
    INTERRUPTED.get_or_init(|| {
        let flag = Arc::new(AtomicBool::new(false));
        #[cfg(unix)]
        for sig in [signal_hook::consts::SIGINT, signal_hook::consts::SIGTERM] {
            // a second signal ends the process at once (exit status 130,
            // as a shell reports an interrupt) …
            let _ = signal_hook::flag::register_conditional_shutdown(sig, 130, Arc::clone(&flag));
            // … the first only sets the flag (registered second: it runs after the check)
            let _ = signal_hook::flag::register(sig, Arc::clone(&flag));
        }
        flag
    })
}

/// True once Ctrl-C (or SIGTERM) was received.
pub fn interrupted() -> bool {
    INTERRUPTED.get().is_some_and(|f| f.load(Ordering::SeqCst))
}

/// A terminal progress line (nothing when stderr is not a terminal).
pub struct Bar(Option<indicatif::ProgressBar>);

impl Bar {
    /// A bar for `what` counting `unit` (e.g. "objects fitted") up to `total`
    /// (a spinner with the rate when the total is not known).
    pub fn new(what: &str, unit: &str, total: Option<u64>) -> Bar {
        if !std::io::stderr().is_terminal() {
            return Bar(None);
        }
        let (bar, template) = match total {
            Some(n) => (
                indicatif::ProgressBar::new(n),
                format!(
                    "zvet {what}: {{bar:30}} {{pos}}/{{len}} {unit} ({{per_sec}}, {{eta}} left) — Ctrl-C stops cleanly"
                ),
            ),
            None => (
                indicatif::ProgressBar::new_spinner(),
                format!("zvet {what}: {{spinner}} {{pos}} {unit} ({{per_sec}}, {{elapsed}}) — Ctrl-C stops cleanly"),
            ),
        };
        if let Ok(style) = indicatif::ProgressStyle::with_template(&template) {
            bar.set_style(style);
        }
        bar.enable_steady_tick(std::time::Duration::from_millis(250));
        Bar(Some(bar))
    }

    /// A spinner for a command made of steps whose length is not known in
    /// objects (merge, export, report): shows the step and the time taken.
    pub fn steps(what: &str) -> Bar {
        if !std::io::stderr().is_terminal() {
            return Bar(None);
        }
        let bar = indicatif::ProgressBar::new_spinner();
        let template =
            format!("zvet {what}: {{spinner}} {{msg}} ({{elapsed}}) — Ctrl-C stops, nothing half-written");
        if let Ok(style) = indicatif::ProgressStyle::with_template(&template) {
            bar.set_style(style);
        }
        bar.enable_steady_tick(std::time::Duration::from_millis(120));
        Bar(Some(bar))
    }

    /// Name the step in hand; fails when Ctrl-C was pressed, so the command
    /// stops between steps (before its output is moved into place).
    pub fn step(&self, msg: &str) -> anyhow::Result<()> {
        if interrupted() {
            self.finish();
            anyhow::bail!("stopped by the interrupt before {msg}; no output was changed");
        }
        if let Some(b) = &self.0 {
            b.set_message(msg.to_string());
        }
        Ok(())
    }

    /// Set the count.
    pub fn set(&self, n: u64) {
        if let Some(b) = &self.0 {
            b.set_position(n);
        }
    }

    /// Change the total (known only after a first pass).
    pub fn set_total(&self, n: u64) {
        if let Some(b) = &self.0 {
            b.set_length(n);
        }
    }

    /// Remove the line.
    pub fn finish(&self) {
        if let Some(b) = &self.0 {
            b.finish_and_clear();
        }
    }
}

impl Drop for Bar {
    fn drop(&mut self) {
        self.finish();
    }
}
