//! Progress bars for long work: drawn on a terminal, silent otherwise.

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

/// A bar of `len` steps labelled `what`; hidden unless stderr is a terminal.
pub fn bar(len: u64, what: &str) -> ProgressBar {
    let pb = ProgressBar::with_draw_target(Some(len), ProgressDrawTarget::stderr());
    if let Ok(style) = ProgressStyle::with_template("{msg:>12} [{bar:30}] {pos}/{len} ({eta} left)")
    {
        pb.set_style(style.progress_chars("=> "));
    }
    pb.set_message(what.to_string());
    pb
}
