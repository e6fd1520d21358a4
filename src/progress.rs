//! A progress bar on a terminal, silent when output is piped or `--quiet`.

use std::io::IsTerminal;

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

/// Runs `work` with a spinner that counts finished items; `work` calls the tick function
/// once per item.
pub fn with_bar<T>(quiet: bool, what: &str, work: impl FnOnce(&(dyn Fn() + Sync)) -> T) -> T {
    let show = !quiet && std::io::stderr().is_terminal();
    let bar = ProgressBar::with_draw_target(
        None,
        if show {
            ProgressDrawTarget::stderr()
        } else {
            ProgressDrawTarget::hidden()
        },
    );
    bar.set_style(
        ProgressStyle::with_template("{spinner} {msg}: {pos} files [{elapsed}]")
            .unwrap_or_else(|_| ProgressStyle::default_spinner()),
    );
    bar.set_message(what.to_string());
    let tick = || bar.inc(1);
    let out = work(&tick);
    bar.finish_and_clear();
    out
}
