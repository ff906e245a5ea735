//! How the allocator hands freed memory back to the system during a long run.
//!
//! glibc's allocator raises its mmap and trim thresholds after each large free (up to
//! 32 MB and 64 MB), so buffers that used to be mapped and unmapped are carved from the
//! heap instead and their pages stay resident when freed. A long valuation run frees the
//! Parquet writers' page buffers and each chunk's columns over and over while the footer
//! metadata of every row group stays, and the freed holes between them add up: peak RSS
//! grew from 35 MB at 10,000 scenarios to 47 MB at 300,000 and 73 MB at 1,000,000. With
//! both thresholds fixed at glibc's initial 128 KiB it grows from 29 to 34 MB and 38 MB,
//! at the same CPU time (README, "Benchmarks").
//!
//! Only `value` and `merge` fix them. Writing `paths.parquet` builds batches of a few
//! hundred KB per scenario, which a 128 KiB threshold maps and unmaps every time: the
//! demo's `project` took 16.4 s wall (16.7 s in the kernel) instead of 6.8 s (4.0 s), and
//! no threshold between 512 KiB and 4 MiB kept both that speed and the memory saving.

/// glibc's initial mmap and trim threshold, kept fixed.
#[cfg(all(target_os = "linux", target_env = "gnu"))]
const THRESHOLD_BYTES: libc::c_int = 128 * 1024;

/// Fixes the allocator's mmap and trim thresholds (glibc; elsewhere nothing), so that
/// large buffers are mapped and returned to the system when freed. Call once, early.
#[cfg(all(target_os = "linux", target_env = "gnu"))]
pub fn return_large_frees() {
    // SAFETY: mallopt takes no pointer; it sets two of the allocator's parameters, which
    // glibc allows at any time from any thread.
    unsafe {
        libc::mallopt(libc::M_MMAP_THRESHOLD, THRESHOLD_BYTES);
        libc::mallopt(libc::M_TRIM_THRESHOLD, THRESHOLD_BYTES);
    }
}

/// Fixes the allocator's mmap and trim thresholds (glibc; elsewhere nothing), so that
/// large buffers are mapped and returned to the system when freed. Call once, early.
#[cfg(not(all(target_os = "linux", target_env = "gnu")))]
pub fn return_large_frees() {}

#[cfg(test)]
mod tests {
    #[test]
    fn live_memory_is_untouched() {
        super::return_large_frees();
        let kept: Vec<u64> = (0..1_000_000).collect();
        drop(vec![7u8; 8 << 20]);
        let again = vec![1u8; 8 << 20];
        assert_eq!(kept.iter().sum::<u64>(), 999_999 * 1_000_000 / 2);
        assert_eq!(again.iter().map(|&b| u64::from(b)).sum::<u64>(), 8 << 20);
    }
}
