//! What a search will hold in memory, estimated before any of it is allocated, so
//! that a request too large for the machine (a huge DM range, a block of hours)
//! gets one clear error instead of an aborted allocation.

use super::blocks::BlockLayout;
use crate::dedisperse::DmPlan;
use crate::dedisperse::bf16::Bf16;

const GIB: f64 = (1u64 << 30) as f64;

/// What the program holds whatever it searches: code, libraries, thread stacks and
/// the allocator's arenas. Measured: a peak of 10 MiB searching a 2 s file of 32
/// channels (2026-12-04); 16 MiB leaves room for the allocator's slack.
const PROGRAM_BYTES: f64 = 16.0 * (1u64 << 20) as f64;

/// Bytes per sample of a block that each worker of the matched filter holds for the
/// series it searches: the series decoded to f32, its prefix sums in f64, and the
/// noise sums and threshold tiles (f32, at most as long as the series).
const FILTER_BYTES_PER_SAMPLE: f64 = 4.0 + 8.0 + 4.0;

/// Bytes a search of blocks laid out as `layout` over `n_chan` channels, read
/// `read_bytes` bytes per sample (1 for 8-bit data read as stored, 4 for f32),
/// holds at once:
/// - the channel-major block itself (f32);
/// - two reads of up to a block each (one being filled while one waits);
/// - the fast kernel's copy of the block at half resolution, halved further in
///   place for its coarser steps (half a block; f32);
/// - every step's dedispersed output for one block (bfloat16);
/// - the kernel's stage-1 scratch ([`DmPlan::cost`]);
/// - each worker thread's matched-filter buffers, and the program itself.
pub fn estimate_bytes(
    layout: &BlockLayout,
    plan: &DmPlan,
    n_chan: usize,
    read_bytes: usize,
) -> f64 {
    bytes_besides_scratch(layout, plan, n_chan, read_bytes) + plan.cost().fast_scratch_bytes
}

/// [`estimate_bytes`] without the kernel's scratch, which takes sizing every step's
/// trees (seconds, and gigabytes, for an absurd plan).
fn bytes_besides_scratch(
    layout: &BlockLayout,
    plan: &DmPlan,
    n_chan: usize,
    read_bytes: usize,
) -> f64 {
    let block_values = (layout.block_len * n_chan) as f64;
    let outputs: f64 = plan
        .steps
        .iter()
        .map(|s| (s.dms.len() * (layout.block_len / s.downsample)) as f64)
        .sum();
    let (f32_bytes, bf16_bytes) = (size_of::<f32>() as f64, size_of::<Bf16>() as f64);
    let reads = 2.0 * block_values * read_bytes as f64;
    let filter =
        rayon::current_num_threads() as f64 * layout.block_len as f64 * FILTER_BYTES_PER_SAMPLE;
    1.5 * block_values * f32_bytes + reads + outputs * bf16_bytes + filter + PROGRAM_BYTES
}

/// Refuses a search needing more than `limit_bytes` (`None`: no limit).
///
/// # Errors
/// When the estimate exceeds the limit: a message naming the need, what drives it
/// and what to change (the caller names the recording).
pub fn check(
    layout: &BlockLayout,
    plan: &DmPlan,
    n_chan: usize,
    read_bytes: usize,
    tsamp_s: f64,
    limit_bytes: Option<f64>,
) -> Result<(), String> {
    // A need over the limit before the scratch is counted is refused without it.
    let base = bytes_besides_scratch(layout, plan, n_chan, read_bytes);
    let (need, bound) = match limit_bytes {
        Some(limit) if base > limit => (base, "at least"),
        _ => (base + plan.cost().fast_scratch_bytes, "about"),
    };
    match limit_bytes {
        Some(limit) if need > limit => Err(format!(
            "the search would need {bound} {:.2} GiB of memory, more than the limit of {:.2} GiB: \
             its blocks span {:.1} s (the sweep at DM {:.1} alone is {:.1} s) and its plan has {} \
             trial DMs; lower the highest DM, shorten the blocks, average samples or channels \
             as they are read (--average-samples, --average-channels), or raise --memory-limit-gib",
            need / GIB,
            limit / GIB,
            layout.block_len as f64 * tsamp_s,
            plan.max_dm(),
            layout.max_delay as f64 * tsamp_s,
            plan.n_trials(),
        )),
        _ => Ok(()),
    }
}

/// The default memory limit: 90 % of the machine's physical memory where it can be
/// read (`MemTotal` of `/proc/meminfo` on Linux), otherwise none.
pub fn default_limit_bytes() -> Option<f64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    parse_mem_total_bytes(&text).map(|b| 0.9 * b)
}

/// `MemTotal` of a `/proc/meminfo` text, in bytes.
fn parse_mem_total_bytes(meminfo: &str) -> Option<f64> {
    let line = meminfo.lines().find(|l| l.starts_with("MemTotal:"))?;
    let mut words = line["MemTotal:".len()..].split_whitespace();
    let value: f64 = words.next()?.parse().ok()?;
    match words.next() {
        Some("kB") => Some(value * 1024.0),
        _ => None,
    }
}

/// A limit in GiB as bytes, or the default when `None`.
pub fn limit_bytes(limit_gib: Option<f64>) -> Option<f64> {
    match limit_gib {
        Some(gib) => Some(gib * GIB),
        None => default_limit_bytes(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn layout(block_len: usize, max_delay: usize) -> BlockLayout {
        BlockLayout {
            max_delay,
            max_width: 1,
            margin: 3,
            overlap: max_delay + 7,
            block_len,
            baseline_len: 10,
        }
    }

    #[test]
    fn estimate_counts_block_reads_and_outputs() {
        let freqs: Vec<f64> = (0..16).map(|i| 1600.0 - 25.0 * i as f64).collect();
        let plan = DmPlan::uniform(freqs, 25.0, 1e-3, 0.0, 100.0, 10);
        let scratch = plan.cost().fast_scratch_bytes;
        assert!(scratch > 0.0);
        // 1.5 block copies of 16 × 1000 f32, two reads of 16 × 1000 samples,
        // 10 trials × 1000 bfloat16 outputs, 16 bytes a sample of the block per
        // thread, and the program, plus scratch.
        let filter = rayon::current_num_threads() as f64 * 1000.0 * 16.0;
        for (read_bytes, reads) in [(4, 2.0 * 16_000.0 * 4.0), (1, 2.0 * 16_000.0)] {
            let bytes = estimate_bytes(&layout(1000, 300), &plan, 16, read_bytes);
            let floor = 1.5 * 16_000.0 * 4.0 + reads + 10_000.0 * 2.0 + filter + PROGRAM_BYTES;
            assert_eq!(bytes, floor + scratch, "{read_bytes}-byte reads");
        }
    }

    #[test]
    fn check_refuses_beyond_the_limit_with_the_reason() {
        let freqs: Vec<f64> = (0..16).map(|i| 1600.0 - 25.0 * i as f64).collect();
        let plan = DmPlan::uniform(freqs, 25.0, 1e-3, 0.0, 100.0, 10);
        let l = layout(1000, 300);
        let need = estimate_bytes(&l, &plan, 16, 4);
        assert!(check(&l, &plan, 16, 4, 1e-3, Some(need)).is_ok());
        assert!(check(&l, &plan, 16, 4, 1e-3, None).is_ok());
        // Byte reads need less: a limit too small for f32 reads can do for them.
        assert!(check(&l, &plan, 16, 1, 1e-3, Some(need - 1.0)).is_ok());
        let base = need - plan.cost().fast_scratch_bytes;
        let e = check(&l, &plan, 16, 4, 1e-3, Some(need - 1.0)).unwrap_err();
        assert!(
            e.contains("--memory-limit-gib") && e.contains("DM 100.0") && e.contains("about"),
            "{e}"
        );
        // Over the limit before the scratch: refused as a lower bound, unsized.
        let e = check(&l, &plan, 16, 4, 1e-3, Some(base - 1.0)).unwrap_err();
        assert!(e.contains("at least"), "{e}");
    }

    #[test]
    fn reads_mem_total() {
        let text = "MemTotal:       24576000 kB\nMemFree:         1000 kB\n";
        assert_eq!(parse_mem_total_bytes(text), Some(24_576_000.0 * 1024.0));
        assert_eq!(parse_mem_total_bytes("MemFree: 3 kB\n"), None);
        assert_eq!(parse_mem_total_bytes("MemTotal: lots\n"), None);
        assert_eq!(limit_bytes(Some(2.0)), Some(2.0 * GIB));
    }
}
