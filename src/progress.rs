//! A one-line progress display on standard error: the stage in plain words, the
//! bytes of input read (with their rate) and the rows seen so far.
//!
//! It is drawn only when standard error is a terminal and `SEXTANT_NO_PROGRESS`
//! is not set; otherwise every call does nothing, so logs, pipes and CI stay
//! clean. It never touches standard output or any result file, so it cannot
//! change what a run writes. The line is redrawn at most 10 times a second.
//!
//! A [`Progress`] is shared by reference between threads: adding bytes and
//! setting rows are atomic updates, and only drawing (rate-limited) takes a lock.

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressFinish, ProgressState, ProgressStyle};
use std::io::IsTerminal;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, Mutex};
use std::time::Duration;

/// The environment variable that turns the display off even on a terminal.
pub const NO_PROGRESS_VARIABLE: &str = "SEXTANT_NO_PROGRESS";

/// Redraws per second, at most.
const REDRAWS_PER_SECOND: u8 = 10;

/// The progress of one run. See the module documentation.
pub struct Progress {
    /// `None` when nothing is shown: then every call returns at once.
    shown: Option<Shown>,
}

struct Shown {
    bar: ProgressBar,
    rows: Arc<AtomicU64>,
    stage: Arc<Mutex<String>>,
}

/// What a visible progress holds at one moment.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Snapshot {
    pub stage: String,
    pub bytes: u64,
    pub rows: u64,
}

/// Whether to show progress: only on a terminal, and only when the user has not
/// turned it off.
pub fn wanted(stderr_is_terminal: bool, turned_off: bool) -> bool {
    stderr_is_terminal && !turned_off
}

impl Progress {
    /// The progress of a run reading `total_input_bytes` bytes of input (0 when
    /// unknown), shown on standard error if [`wanted`] there.
    pub fn new(total_input_bytes: u64) -> Progress {
        let show = wanted(
            std::io::stderr().is_terminal(),
            std::env::var_os(NO_PROGRESS_VARIABLE).is_some(),
        );
        if show {
            Progress::drawn_to(
                total_input_bytes,
                ProgressDrawTarget::stderr_with_hz(REDRAWS_PER_SECOND),
            )
        } else {
            Progress::hidden()
        }
    }

    /// A progress that shows nothing and does nothing.
    pub fn hidden() -> Progress {
        Progress { shown: None }
    }

    fn drawn_to(total_input_bytes: u64, target: ProgressDrawTarget) -> Progress {
        let rows = Arc::new(AtomicU64::new(0));
        let stage = Arc::new(Mutex::new(String::new()));
        let template = if total_input_bytes > 0 {
            "{spinner} [{bar:20}] {line}"
        } else {
            "{spinner} {line}"
        };
        let (line_rows, line_stage) = (rows.clone(), stage.clone());
        let style = ProgressStyle::with_template(template)
            .expect("the template is fixed and valid")
            .progress_chars("=> ")
            .with_key(
                "line",
                move |state: &ProgressState, w: &mut dyn std::fmt::Write| {
                    let stage = line_stage.lock().map(|s| s.clone()).unwrap_or_default();
                    let text = line(
                        &stage,
                        state.pos(),
                        state.len().unwrap_or(0),
                        Some(state.per_sec()),
                        line_rows.load(Ordering::Relaxed),
                    );
                    let _ = w.write_str(&text);
                },
            );
        let length = (total_input_bytes > 0).then_some(total_input_bytes);
        let bar = ProgressBar::with_draw_target(length, target)
            .with_style(style)
            .with_finish(ProgressFinish::AndClear);
        // Keeps the spinner, stage and rate fresh during stages that read nothing.
        bar.enable_steady_tick(Duration::from_millis(1000 / u64::from(REDRAWS_PER_SECOND)));
        Progress {
            shown: Some(Shown { bar, rows, stage }),
        }
    }

    /// Whether this progress shows nothing (and so ignores every call).
    pub fn is_hidden(&self) -> bool {
        self.shown.is_none()
    }

    /// Names the stage now running, in plain words ("reading the table").
    pub fn stage(&self, name: &str) {
        if let Some(s) = &self.shown {
            if let Ok(mut stage) = s.stage.lock() {
                name.clone_into(&mut stage);
            }
            s.bar.tick();
        }
    }

    /// Counts `n` more bytes of input read.
    pub fn add_bytes(&self, n: u64) {
        if let Some(s) = &self.shown {
            s.bar.inc(n);
        }
    }

    /// Sets the number of rows seen so far.
    pub fn set_rows(&self, rows: u64) {
        if let Some(s) = &self.shown {
            s.rows.store(rows, Ordering::Relaxed);
        }
    }

    /// Runs `f` (which may print to standard error) with the line cleared, and
    /// draws it again afterwards.
    pub fn suspend<R>(&self, f: impl FnOnce() -> R) -> R {
        match &self.shown {
            Some(s) => s.bar.suspend(f),
            None => f(),
        }
    }

    /// Removes the line; later calls do nothing visible. Dropping a progress
    /// without finishing it removes the line too.
    pub fn finish(&self) {
        if let Some(s) = &self.shown {
            s.bar.finish_and_clear();
        }
    }

    /// The stage, bytes and rows held now; `None` when hidden.
    pub fn snapshot(&self) -> Option<Snapshot> {
        self.shown.as_ref().map(|s| Snapshot {
            stage: s.stage.lock().map(|s| s.clone()).unwrap_or_default(),
            bytes: s.bar.position(),
            rows: s.rows.load(Ordering::Relaxed),
        })
    }
}

/// The text of the progress line: the stage, the bytes read out of `total` (0
/// when unknown) with the rate while reading, and the rows when there are any.
pub fn line(
    stage: &str,
    bytes: u64,
    total: u64,
    bytes_per_second: Option<f64>,
    rows: u64,
) -> String {
    let stage = if stage.is_empty() { "starting" } else { stage };
    let mut text = format!("{stage}: {}", byte_size(bytes));
    if total > 0 {
        text.push_str(&format!(" of {}", byte_size(total)));
    }
    text.push_str(" read");
    let reading = total == 0 || bytes < total;
    if let Some(rate) = bytes_per_second.filter(|r| reading && r.is_finite() && *r >= 1.0) {
        text.push_str(&format!(" ({}/s)", byte_size(rate as u64)));
    }
    if rows > 0 {
        let noun = if rows == 1 { "row" } else { "rows" };
        text.push_str(&format!(", {} {noun}", thousands(rows)));
    }
    text
}

/// A byte count in binary units with one decimal: 512 B, 1.5 KiB, 43.5 MiB.
pub fn byte_size(n: u64) -> String {
    const UNITS: [&str; 6] = ["KiB", "MiB", "GiB", "TiB", "PiB", "EiB"];
    if n < 1024 {
        return format!("{n} B");
    }
    let mut value = n as f64 / 1024.0;
    let mut unit = 0;
    // Moves up a unit before rounding could print "1024.0".
    while value >= 1023.95 && unit + 1 < UNITS.len() {
        value /= 1024.0;
        unit += 1;
    }
    format!("{value:.1} {}", UNITS[unit])
}

/// A count with commas between groups of three digits: 1,234,567.
fn thousands(n: u64) -> String {
    let digits = n.to_string();
    let mut out = String::with_capacity(digits.len() + digits.len() / 3);
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

/// The progress line of this process: one per run, started where the input's
/// size becomes known ([`start`]) and reached from any stage through
/// [`current`], as a log would be, so that no stage's signature carries it.
static CURRENT: std::sync::OnceLock<Progress> = std::sync::OnceLock::new();

/// Starts the progress line for an input of `total_input_bytes` bytes (shown
/// only where [`wanted`]); later calls keep the first line.
pub fn start(total_input_bytes: u64) {
    let _ = CURRENT.set(Progress::new(total_input_bytes));
}

/// The progress line, or a hidden one when none was started.
pub fn current() -> &'static Progress {
    CURRENT.get_or_init(Progress::hidden)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rayon::prelude::*;

    #[test]
    fn shown_only_on_a_terminal_and_when_not_turned_off() {
        assert!(wanted(true, false));
        assert!(!wanted(false, false));
        assert!(!wanted(true, true));
        assert!(!wanted(false, true));
    }

    #[test]
    fn a_hidden_progress_ignores_every_call() {
        let p = Progress::hidden();
        assert!(p.is_hidden());
        p.stage("reading the table");
        p.add_bytes(1000);
        p.set_rows(10);
        assert_eq!(p.suspend(|| 7), 7);
        p.finish();
        assert_eq!(p.snapshot(), None);
    }

    #[test]
    fn a_shown_progress_counts_bytes_from_many_threads() {
        let p = Progress::drawn_to(1 << 20, ProgressDrawTarget::hidden());
        assert!(!p.is_hidden());
        p.stage("reading the table");
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(8)
            .build()
            .unwrap();
        pool.install(|| (1..=1000u64).into_par_iter().for_each(|i| p.add_bytes(i)));
        p.set_rows(42);
        let expected = Snapshot {
            stage: "reading the table".to_string(),
            bytes: 500_500, // 1 + 2 + … + 1000
            rows: 42,
        };
        assert_eq!(p.snapshot(), Some(expected));
        p.stage("decomposing");
        assert_eq!(p.snapshot().unwrap().stage, "decomposing");
        p.finish();
    }

    #[test]
    fn the_line_reads_in_plain_words() {
        // 12,345,678 B = 11.77 MiB; 45,600,000 B = 43.49 MiB; 8,912,896 B/s = 8.5 MiB/s.
        assert_eq!(
            line(
                "reading the table",
                12_345_678,
                45_600_000,
                Some(8_912_896.0),
                123_456
            ),
            "reading the table: 11.8 MiB of 43.5 MiB read (8.5 MiB/s), 123,456 rows"
        );
        // Once everything is read the rate is no longer news.
        assert_eq!(
            line("decomposing", 45_600_000, 45_600_000, Some(1e6), 1_000_000),
            "decomposing: 43.5 MiB of 43.5 MiB read, 1,000,000 rows"
        );
        // Unknown total, no rows yet, no rate yet, no stage yet.
        assert_eq!(line("", 512, 0, None, 0), "starting: 512 B read");
        assert_eq!(
            line("reading", 0, 2048, Some(0.0), 1),
            "reading: 0 B of 2.0 KiB read, 1 row"
        );
        assert_eq!(
            line("reading", 10, 0, Some(f64::NAN), 0),
            "reading: 10 B read"
        );
    }

    #[test]
    fn sizes_and_counts_are_rounded_and_grouped() {
        assert_eq!(byte_size(0), "0 B");
        assert_eq!(byte_size(1023), "1023 B");
        assert_eq!(byte_size(1024), "1.0 KiB");
        assert_eq!(byte_size(1536), "1.5 KiB");
        // 1,048,575 B is 1023.999 KiB: written as the next unit, not "1024.0 KiB".
        assert_eq!(byte_size(1_048_575), "1.0 MiB");
        assert_eq!(byte_size(5 << 30), "5.0 GiB");
        assert_eq!(byte_size(u64::MAX), "16.0 EiB");
        assert_eq!(thousands(0), "0");
        assert_eq!(thousands(999), "999");
        assert_eq!(thousands(1000), "1,000");
        assert_eq!(thousands(12_345_678), "12,345,678");
    }
}
