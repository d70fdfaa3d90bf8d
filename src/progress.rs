//! Progress: a bar on a terminal; plain lines (percent, rate, time left)
//! at every tenth of the work when stderr is a log file or a pipe.

use indicatif::{ProgressBar, ProgressStyle};
use std::io::IsTerminal;
use std::sync::Mutex;
use std::time::Instant;

/// Progress of one long task over `total` units.
pub struct Progress {
    bar: Option<ProgressBar>,
    plain: Option<Mutex<Plain>>,
}

struct Plain {
    what: String,
    unit: String,
    total: u64,
    started: Instant,
    next_tenth: u64,
}

/// A bar over `total` units on stderr, or plain progress lines when stderr
/// is not a terminal. `unit` names what is counted ("steps", "runs").
pub fn bar(total: u64, what: &str) -> Progress {
    bar_of(
        total,
        what,
        if what == "run" || what == "tracks" {
            "steps"
        } else {
            "runs"
        },
    )
}

fn bar_of(total: u64, what: &str, unit: &str) -> Progress {
    if !std::io::stderr().is_terminal() {
        return Progress {
            bar: None,
            plain: Some(Mutex::new(Plain {
                what: what.to_string(),
                unit: unit.to_string(),
                total: total.max(1),
                started: Instant::now(),
                next_tenth: 1,
            })),
        };
    }
    let bar = ProgressBar::new(total);
    bar.set_style(
        ProgressStyle::with_template(&format!(
            "{{prefix}} [{{bar:40}}] {{percent:>3}}%  {{pos}}/{{len}} {unit}  elapsed {{elapsed}}  left {{eta}}"
        ))
        .unwrap_or_else(|_| ProgressStyle::default_bar())
        .progress_chars("=> "),
    );
    bar.set_prefix(what.to_string());
    Progress {
        bar: Some(bar),
        plain: None,
    }
}

impl Progress {
    /// Reports that `done` units are finished.
    pub fn set_position(&self, done: u64) {
        if let Some(b) = &self.bar {
            b.set_position(done);
        }
        let Some(plain) = &self.plain else {
            return;
        };
        let Ok(mut p) = plain.lock() else {
            return;
        };
        // One line per tenth crossed; a jump over several tenths prints once.
        let tenth = done.saturating_mul(10) / p.total;
        if tenth < p.next_tenth {
            return;
        }
        p.next_tenth = tenth + 1;
        let elapsed = p.started.elapsed().as_secs_f64();
        let rate = done as f64 / elapsed.max(1e-9);
        let left = (p.total.saturating_sub(done)) as f64 / rate.max(1e-9);
        eprintln!(
            "{}: {:>3}% ({done}/{} {}), {} {}/s, {:.0} s elapsed, about {:.0} s left",
            p.what,
            (done.saturating_mul(100) / p.total).min(100),
            p.total,
            p.unit,
            thicket_analysis::format::sig(rate, 3),
            p.unit,
            elapsed,
            left
        );
    }

    /// Ends the progress display (a terminal bar is cleared).
    pub fn finish_and_clear(&self) {
        if let Some(b) = &self.bar {
            b.finish_and_clear();
        }
    }
}
