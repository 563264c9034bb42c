//! How the work meets the machine: running on the rayon pool's own threads, and the size of
//! the last-level cache that decides how the explicit kernel sweeps a grid.
//!
//! A parallel loop started from a thread outside the pool hands its work to the pool and puts
//! the caller to sleep until the pool is done: two thread wake-ups per loop, tens of
//! microseconds on a virtual machine, which is the whole cost of a step on a 200 x 100 grid.
//! Started from a pool thread, the same loop splits its work in place and the caller takes
//! part. [`in_pool`] moves a whole march (many steps, many loops) onto a pool thread once.

/// Runs `f` on a thread of the current rayon pool (directly when already on one), so the
/// parallel loops inside it start without a hand-over.
pub fn in_pool<R: Send>(f: impl FnOnce() -> R + Send) -> R {
    if rayon::current_thread_index().is_some() {
        f()
    } else {
        rayon::scope(|_| f())
    }
}

/// The last-level data cache in bytes (Linux: the highest cache level in
/// `/sys/devices/system/cpu/cpu0/cache`; elsewhere, or when it cannot be read, 8 MiB). Read once.
pub fn last_level_cache_bytes() -> usize {
    static BYTES: std::sync::OnceLock<usize> = std::sync::OnceLock::new();
    *BYTES.get_or_init(|| read_cache_bytes().unwrap_or(8 << 20))
}

fn read_cache_bytes() -> Option<usize> {
    let dir = std::fs::read_dir("/sys/devices/system/cpu/cpu0/cache").ok()?;
    let mut best: Option<(u32, usize)> = None;
    for entry in dir.flatten() {
        let read = |name: &str| std::fs::read_to_string(entry.path().join(name)).ok();
        let (Some(level), Some(kind), Some(size)) = (read("level"), read("type"), read("size")) else {
            continue;
        };
        let (Ok(level), Some(bytes)) = (level.trim().parse::<u32>(), parse_size(size.trim())) else {
            continue;
        };
        if kind.trim() != "Instruction" && best.is_none_or(|(l, _)| level > l) {
            best = Some((level, bytes));
        }
    }
    best.map(|(_, b)| b)
}

/// `"32768K"`, `"1M"` or `"512"` (bytes) as bytes.
fn parse_size(s: &str) -> Option<usize> {
    let (digits, unit) = match s.char_indices().find(|(_, c)| !c.is_ascii_digit()) {
        Some((k, _)) => s.split_at(k),
        None => (s, ""),
    };
    let n: usize = digits.parse().ok()?;
    let scale = match unit {
        "" => 1,
        "K" => 1 << 10,
        "M" => 1 << 20,
        "G" => 1 << 30,
        _ => return None,
    };
    n.checked_mul(scale)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cache_sizes_parse_as_the_kernel_writes_them() {
        // The units of sysfs cache sizes (Linux Documentation/ABI, sysfs-devices-system-cpu).
        assert_eq!(parse_size("32768K"), Some(32 << 20));
        assert_eq!(parse_size("2M"), Some(2 << 20));
        assert_eq!(parse_size("4096"), Some(4096));
        assert_eq!(parse_size("12Q"), None);
        assert_eq!(parse_size(""), None);
        assert!(last_level_cache_bytes() >= 1 << 16);
    }

    #[test]
    fn runs_on_a_pool_thread_and_returns_the_value() {
        assert!(rayon::current_thread_index().is_none());
        let (on_pool, v) = in_pool(|| (rayon::current_thread_index().is_some(), 42));
        assert!(on_pool);
        assert_eq!(v, 42);
        // Nested: already on the pool, runs in place.
        let nested = in_pool(|| in_pool(rayon::current_thread_index));
        assert!(nested.is_some());
    }
}
