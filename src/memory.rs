//! What memory the process may still take, for checks made before a large allocation.
//!
//! A declared size is refused with [`Error::Resources`] when its estimate exceeds
//! [`available_bytes`], instead of letting the allocator abort the process (an abort gives
//! no message and, under a `ulimit -v` limit, no JSON).

use crate::error::{Error, Result};

fn proc_kib(file: &str, key: &str) -> Option<u64> {
    let text = std::fs::read_to_string(file).ok()?;
    let line = text.lines().find(|l| l.starts_with(key))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

/// The address-space limit (`ulimit -v`, RLIMIT_AS) minus what the process already maps,
/// from `/proc/self/limits` and `/proc/self/status`; `None` when unlimited or unknown.
fn address_space_left() -> Option<u64> {
    let limits = std::fs::read_to_string("/proc/self/limits").ok()?;
    let line = limits.lines().find(|l| l.starts_with("Max address space"))?;
    let soft = line.split_whitespace().nth(3)?;
    let limit: u64 = soft.parse().ok()?; // "unlimited" does not parse
    let used = proc_kib("/proc/self/status", "VmSize:")
        .unwrap_or(0)
        .saturating_mul(1024);
    Some(limit.saturating_sub(used))
}

/// Bytes the process can still allocate: the smaller of `MemAvailable` (`/proc/meminfo`)
/// and the room left under the address-space limit. `None` when neither is known
/// (non-Linux systems): then no size is refused for memory.
///
/// ```
/// if let Some(bytes) = tangency::memory::available_bytes() {
///     assert!(bytes > 0);
/// }
/// ```
pub fn available_bytes() -> Option<u64> {
    let mem = proc_kib("/proc/meminfo", "MemAvailable:").map(|k| k.saturating_mul(1024));
    match (mem, address_space_left()) {
        (Some(a), Some(b)) => Some(a.min(b)),
        (a, b) => a.or(b),
    }
}

/// Refuses `need` bytes for `what` when more than [`available_bytes`] is asked.
///
/// ```
/// assert!(tangency::memory::check(1024, "a small buffer").is_ok());
/// let e = tangency::memory::check(u64::MAX, "a dense K").unwrap_err();
/// assert!(e.to_string().contains("a dense K"));
/// ```
pub fn check(need: u64, what: &str) -> Result<()> {
    match available_bytes() {
        Some(have) if need > have => Err(Error::Resources {
            detail: format!(
                "{what} needs about {} but only {} can be allocated (MemAvailable and the address-space limit)",
                human(need),
                human(have)
            ),
        }),
        _ => Ok(()),
    }
}

/// Bytes in words (`1.5 GB`), decimal units.
pub fn human(bytes: u64) -> String {
    let b = bytes as f64;
    if b >= 1e12 {
        format!("{:.1} TB", b / 1e12)
    } else if b >= 1e9 {
        format!("{:.1} GB", b / 1e9)
    } else if b >= 1e6 {
        format!("{:.1} MB", b / 1e6)
    } else {
        format!("{bytes} bytes")
    }
}
