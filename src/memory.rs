//! Memory sizes: parsing `512MiB`-style sizes, planning the budget, and
//! reading the process's peak resident memory.

use crate::error::{Error, Result};

/// Memory kept aside from the budget's tables for the process itself:
/// this fixed part plus [`RESERVE_PER_THREAD`] for each thread (read
/// buffers, compression contexts, RocksDB's writers).
pub const RESERVE_FIXED: u64 = 12 << 20;
/// Per-thread part of the reserve.
pub const RESERVE_PER_THREAD: u64 = 3 << 20;
/// The part of the reserve that grows with the budget: one part in this
/// many. Tables sized to the budget bring costs of their own that the
/// fixed parts do not cover: page tables (8 bytes per 4 KiB page touched),
/// the allocator's slack, and merging threads whose many section readers
/// held 22 MB each where the plan counts 12 (85 MiB at 4 GiB). At 4 GiB of
/// text under `--memory 4GiB`, one 128th left the merge's peak 10 MiB under
/// the budget in one run and 15 MiB over it in another.
pub const RESERVE_SHARE: u64 = 48;
/// Smallest `--memory` accepted.
pub const MIN_BUDGET: u64 = 16 << 20;

/// Parses sizes such as `4GiB`, `512MiB`, `64M`, `1.5G`, `100000` (bytes).
/// K/M/G/T and KB/MB/... are powers of 1000; KiB/MiB/... powers of 1024.
pub fn parse_size(s: &str) -> Result<u64> {
    let t = s.trim();
    let split = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let n: f64 = num
        .parse()
        .map_err(|_| Error::Config(format!("{s:?} is not a size (try 512MiB or 4GiB)")))?;
    let mult: f64 = match unit.trim().to_ascii_lowercase().as_str() {
        "" | "b" => 1.0,
        "k" | "kb" => 1e3,
        "m" | "mb" => 1e6,
        "g" | "gb" => 1e9,
        "t" | "tb" => 1e12,
        "kib" => 1024.0,
        "mib" => 1024.0 * 1024.0,
        "gib" => 1024.0 * 1024.0 * 1024.0,
        "tib" => 1024.0 * 1024.0 * 1024.0 * 1024.0,
        _ => {
            return Err(Error::Config(format!(
                "{s:?}: unknown unit {unit:?} (use KiB, MiB, GiB)"
            )))
        }
    };
    Ok((n * mult) as u64)
}

/// How a budget is divided.
#[derive(Clone, Copy, Debug)]
pub struct Plan {
    /// Bytes for each counting worker's table and dictionary.
    pub count_worker: usize,
    /// Bytes for each merging worker's continuation table.
    pub merge_worker: usize,
    /// Most run sections one merge reads at once.
    pub fanin: usize,
}

/// Bytes of `budget` kept aside from the tables of `threads` workers.
pub fn reserve(budget: u64, threads: u64) -> u64 {
    RESERVE_FIXED + RESERVE_PER_THREAD * threads + budget / RESERVE_SHARE
}

/// Bytes a run section reader holds (zstd window and buffers), measured
/// generously.
pub const READER_BYTES: usize = 400 << 10;

impl Plan {
    /// Divides `budget` bytes among `threads` workers.
    pub fn new(budget: u64, threads: usize) -> Result<Plan> {
        if budget < MIN_BUDGET {
            return Err(Error::Config(format!(
                "--memory {budget} bytes is below the minimum of {} MiB",
                MIN_BUDGET >> 20
            )));
        }
        let threads = threads.max(1) as u64;
        let reserve = reserve(budget, threads);
        let avail = budget.saturating_sub(reserve).max(threads * (2 << 20));
        let per = (avail / threads) as usize;
        let fanin = (per / 2 / READER_BYTES).clamp(4, 64);
        Ok(Plan {
            count_worker: per,
            merge_worker: per - fanin * READER_BYTES,
            fanin,
        })
    }
}

/// Hands the allocator's free memory back to the system (glibc's
/// `malloc_trim`; nothing elsewhere).
///
/// glibc keeps memory freed by small allocations in its per-thread heaps,
/// resident, for the next allocation of that thread. After counting, the
/// workers' dictionaries (millions of words) are freed but stay resident,
/// and the merge's continuation tables, sized to the budget, came on top:
/// at 4 GiB of text with `--memory 4GiB` the merge peaked at 4.40 GB,
/// 97 MiB over, with 121 MB free in the heaps (`malloc_stats()`), most of
/// it from threads that had finished. Each ingest phase calls this as it
/// starts, where one phase's working set gives way to the next one's.
#[allow(unsafe_code)]
pub fn release_free_heap() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    // SAFETY: `malloc_trim` only returns free pages of the allocator's own
    // heaps to the kernel; it touches no memory in use and is thread-safe.
    unsafe {
        libc::malloc_trim(0);
    }
}

/// Peak resident set size of this process in bytes (Linux), if known.
pub fn peak_rss() -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = s.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb * 1024)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Anonymous resident memory of this process (Linux), in bytes.
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    fn rss_anon() -> u64 {
        let s = std::fs::read_to_string("/proc/self/status").unwrap();
        let line = s.lines().find(|l| l.starts_with("RssAnon:")).unwrap();
        line.split_whitespace()
            .nth(1)
            .unwrap()
            .parse::<u64>()
            .unwrap()
            * 1024
    }

    /// Many small allocations freed by a thread that has finished stay
    /// resident (a live one made after them keeps the heap from shrinking
    /// on its own) until the free memory is released.
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    #[test]
    fn freed_small_allocations_go_back() {
        const MIB: u64 = 1 << 20;
        let before = rss_anon();
        let keep = std::thread::spawn(|| {
            let many: Vec<Box<[u8; 48]>> =
                (0..(192 * MIB / 64)).map(|_| Box::new([1u8; 48])).collect();
            let last = Box::new([2u8; 48]);
            drop(many);
            last
        })
        .join()
        .unwrap();
        let freed = rss_anon();
        release_free_heap();
        let after = rss_anon();
        assert_eq!(keep[0], 2);
        assert!(
            freed > before + 96 * MIB,
            "the freed memory was not resident: {before} then {freed}"
        );
        assert!(
            freed - after > 96 * MIB,
            "released {} MiB of {} MiB resident",
            (freed - after.min(freed)) / MIB,
            (freed - before) / MIB
        );
    }

    #[test]
    fn sizes() {
        assert_eq!(parse_size("32MiB").unwrap(), 32 << 20);
        assert_eq!(parse_size("4GiB").unwrap(), 4 << 30);
        assert_eq!(parse_size("1.5G").unwrap(), 1_500_000_000);
        assert_eq!(parse_size("100").unwrap(), 100);
        assert!(parse_size("lots").is_err());
        assert!(parse_size("3 parsecs").is_err());
    }

    #[test]
    fn plan_stays_within_budget() {
        for (b, t) in [
            (16u64 << 20, 1usize),
            (32 << 20, 2),
            (4 << 30, 2),
            (1 << 30, 16),
        ] {
            let p = Plan::new(b, t).unwrap();
            let r = reserve(b, t as u64);
            let used = r + (p.count_worker as u64) * t as u64;
            assert!(used <= b.max(r + t as u64 * (2 << 20)));
            assert!(p.merge_worker + p.fanin * READER_BYTES <= p.count_worker);
        }
    }
}
