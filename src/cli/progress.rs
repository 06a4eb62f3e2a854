//! Progress bars on stderr: shown only when stderr is a terminal and not silenced.

use std::io::IsTerminal;

/// A progress bar that does nothing when hidden.
pub struct Bar(Option<indicatif::ProgressBar>);

impl Bar {
    /// A bar of `total` steps labelled `what`; hidden when `quiet` or stderr is not a terminal.
    pub fn new(total: u64, what: &str, quiet: bool) -> Bar {
        if quiet || !std::io::stderr().is_terminal() {
            return Bar(None);
        }
        let bar = indicatif::ProgressBar::new(total);
        if let Ok(style) = indicatif::ProgressStyle::with_template(
            "{msg} [{bar:40}] {pos}/{len} ({elapsed}, eta {eta})",
        ) {
            bar.set_style(style.progress_chars("=> "));
        }
        bar.set_message(what.to_string());
        Bar(Some(bar))
    }
    /// One step done.
    pub fn inc(&self) {
        if let Some(b) = &self.0 {
            b.inc(1);
        }
    }
    /// Sets the position (thread-safe).
    pub fn set(&self, done: u64) {
        if let Some(b) = &self.0 {
            b.set_position(done);
        }
    }
    /// Removes the bar.
    pub fn finish(&self) {
        if let Some(b) = &self.0 {
            b.finish_and_clear();
        }
    }
}
