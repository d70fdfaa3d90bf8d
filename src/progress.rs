//! Progress bars on a terminal, silence elsewhere.

use indicatif::{ProgressBar, ProgressStyle};
use std::io::IsTerminal;

/// A bar over `total` units on stderr, hidden when stderr is not a terminal.
pub fn bar(total: u64, what: &str) -> ProgressBar {
    if !std::io::stderr().is_terminal() {
        return ProgressBar::hidden();
    }
    let bar = ProgressBar::new(total);
    bar.set_style(
        ProgressStyle::with_template(
            "{prefix} [{bar:40}] {percent:>3}%  {pos}/{len} steps  elapsed {elapsed}  left {eta}",
        )
        .unwrap_or_else(|_| ProgressStyle::default_bar())
        .progress_chars("=> "),
    );
    bar.set_prefix(what.to_string());
    bar
}
