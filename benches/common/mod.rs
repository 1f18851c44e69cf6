//! Clocks shared by the benchmarks (each bench includes this file with
//! `mod common;`): CPU time does not count the time a thread waits for a
//! core, so it holds on a busy shared machine where wall time does not.

use std::time::Duration;

/// CPU time used so far by `clock` (`CLOCK_THREAD_CPUTIME_ID` or
/// `CLOCK_PROCESS_CPUTIME_ID`), or `None` where the platform does not tell.
#[cfg(unix)]
fn cpu_clock(clock: libc::clockid_t) -> Option<Duration> {
    let mut ts = libc::timespec {
        tv_sec: 0,
        tv_nsec: 0,
    };
    // SAFETY: clock_gettime only writes the timespec we pass.
    let rc = unsafe { libc::clock_gettime(clock, &mut ts) };
    (rc == 0).then(|| Duration::new(ts.tv_sec as u64, ts.tv_nsec as u32))
}

/// CPU time of the calling thread (zero where the platform does not tell).
#[allow(dead_code)]
pub fn thread_cpu() -> Duration {
    #[cfg(unix)]
    {
        cpu_clock(libc::CLOCK_THREAD_CPUTIME_ID).unwrap_or(Duration::ZERO)
    }
    #[cfg(not(unix))]
    {
        Duration::ZERO
    }
}

/// CPU seconds the whole process has used (all threads), where the
/// platform tells.
#[allow(dead_code)]
pub fn process_cpu_s() -> Option<f64> {
    #[cfg(unix)]
    {
        cpu_clock(libc::CLOCK_PROCESS_CPUTIME_ID).map(|d| d.as_secs_f64())
    }
    #[cfg(not(unix))]
    {
        None
    }
}
