//! Optional stage timings on standard error, for profiling: set the environment
//! variable `SEXTANT_TIMING=1`. Nothing here touches any result.

use std::time::Instant;

/// Prints how long `what` took since `since`, when timings are asked for, and
/// returns a new starting point.
pub fn lap(what: &str, since: Instant) -> Instant {
    if std::env::var_os("SEXTANT_TIMING").is_some() {
        let seconds = since.elapsed().as_secs_f64();
        crate::progress::current().suspend(|| eprintln!("timing {seconds:>8.3} s  {what}"));
    }
    Instant::now()
}

/// Prints a total of several stretches of time, when timings are asked for.
pub fn total(what: &str, seconds: f64) {
    if std::env::var_os("SEXTANT_TIMING").is_some() {
        crate::progress::current()
            .suspend(|| eprintln!("timing {seconds:>8.3} s    {what} (total)"));
    }
}
