//! Consecutive files of one recording: which listed file continues which
//! ([`Header::is_continued_by`], on the files' own headers, before any averaging),
//! which files a search reads on into, and the order to search them in
//! (docs/search.md, "Consecutive files").

use super::SearchConfig;
use crate::obs::Header;

/// For each recording, the index of another that continues it
/// ([`Header::is_continued_by`]): the next one listed if it does, else
/// the first that does.
pub fn continuations(headers: &[Header]) -> Vec<Option<usize>> {
    (0..headers.len())
        .map(|i| {
            let continues = |&j: &usize| headers[i].is_continued_by(&headers[j]);
            std::iter::once(i + 1)
                .filter(|&j| j < headers.len())
                .chain(0..headers.len())
                .filter(|&j| j != i)
                .find(continues)
        })
        .collect()
}

/// The order to search the files in: as listed, but each after the file it
/// continues.
pub fn search_order(continuations: &[Option<usize>]) -> Vec<usize> {
    let mut before: Vec<Vec<usize>> = vec![Vec::new(); continuations.len()];
    for (p, next) in continuations.iter().enumerate() {
        if let Some(i) = *next {
            before[i].push(p);
        }
    }
    let mut order = Vec::with_capacity(continuations.len());
    let mut placed = vec![false; continuations.len()];
    for i in 0..continuations.len() {
        // The files before `i`, back to the first of the recording, then `i`.
        let mut stack = vec![(i, false)];
        while let Some((j, ready)) = stack.pop() {
            if placed[j] {
                continue;
            }
            if ready {
                placed[j] = true;
                order.push(j);
                continue;
            }
            stack.push((j, true));
            stack.extend(
                before[j]
                    .iter()
                    .filter(|&&p| !placed[p])
                    .map(|&p| (p, false)),
            );
        }
    }
    order
}

/// The files whose search reads on into file `i`, with the seconds from the start
/// of each to the start of `i`.
pub fn read_on_from(i: usize, headers: &[Header], chains: &[Vec<usize>]) -> Vec<(usize, f64)> {
    chains
        .iter()
        .enumerate()
        .filter(|&(p, _)| p != i)
        .filter_map(|(p, chain)| {
            let at = chain.iter().position(|&j| j == i)?;
            let offset_s = std::iter::once(p)
                .chain(chain[..at].iter().copied())
                .map(|j| headers[j].duration_s())
                .sum();
            Some((p, offset_s))
        })
        .collect()
}

/// Seconds from the start of a file with `header` (as read) to the end of the samples
/// its search owns when it reads on into the file that continues it: its end, or with
/// averaging the end of its last group, which that file's first samples complete.
pub fn owned_end_s(header: &Header, config: &SearchConfig) -> f64 {
    config
        .average
        .run_on_header(header)
        .map_or(header.duration_s(), |own| own.duration_s())
}

/// The files the search of file `i` reads on into: the one that continues it, then,
/// while they hold fewer samples than the search reads on into ([`super::run_on_rows`]:
/// the rest of its last averaged group, then a block overlap), the one that continues
/// the last of them (a file shorter than that is read through into the next, or a
/// sweep crossing it would be cut short).
pub fn run_on_chain(
    i: usize,
    headers: &[Header],
    continuations: &[Option<usize>],
    config: &SearchConfig,
) -> Vec<usize> {
    if continuations[i].is_none() {
        return Vec::new();
    }
    let wanted = super::run_on_rows(&headers[i], config).unwrap_or(0);
    let mut chain = Vec::new();
    let mut reach = 0;
    let mut at = continuations[i];
    while let Some(j) = at {
        if (reach >= wanted && !chain.is_empty()) || j == i || chain.contains(&j) {
            break;
        }
        chain.push(j);
        reach += headers[j].n_samples;
        at = continuations[j];
    }
    chain
}

/// The files of `chain` (as [`run_on_chain`] gives it) that a search reading on
/// `run_on_s` seconds past the end of its own file reached.
pub fn reached<'a>(chain: &'a [usize], headers: &[Header], run_on_s: f64) -> &'a [usize] {
    let mut left_s = run_on_s;
    let n = chain
        .iter()
        .take_while(|&&j| {
            let reached = left_s > 0.5 * headers[j].tsamp_s;
            left_s -= headers[j].duration_s();
            reached
        })
        .count();
    &chain[..n]
}

/// Each pair of recordings of which the later starts within a sample of where the
/// earlier ends yet does not continue it (a header field differs, or the gap is over
/// half a sample): the two are searched apart, and a sweep crossing from one into the
/// other is missed.
/// Returns `(earlier, later, why)`.
pub fn near_misses(
    headers: &[Header],
    continuations: &[Option<usize>],
) -> Vec<(usize, usize, String)> {
    let continued: std::collections::HashSet<usize> =
        continuations.iter().flatten().copied().collect();
    let mut misses = Vec::new();
    for (i, h) in headers.iter().enumerate() {
        if continuations[i].is_some() {
            continue;
        }
        for (j, next) in headers.iter().enumerate() {
            let Some(gap_s) = h.seconds_to(next) else {
                continue;
            };
            if j == i || continued.contains(&j) || gap_s.abs() > h.tsamp_s {
                continue;
            }
            let fields = h.fields_breaking_continuity(next);
            let why = match fields.is_empty() {
                true => format!(
                    "it starts {:.2} samples after that one ends, over half a sample",
                    gap_s / h.tsamp_s
                ),
                false => format!("their headers differ in {}", fields.join(", ")),
            };
            misses.push((i, j, why));
        }
    }
    misses
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::obs::test_header;

    /// Files of `lengths` samples, the k-th starting where the (k−1)-th ends.
    fn consecutive(lengths: &[u64]) -> Vec<Header> {
        let mut files: Vec<Header> = Vec::new();
        for &n in lengths {
            let mut h = test_header(4, n);
            if let Some(before) = files.last() {
                h.start = before.epoch_of_sample(before.n_samples as f64);
            }
            files.push(h);
        }
        files
    }

    // Listed out of order, with one file on its own: each file is continued by the
    // one that starts where it ends, searched after it, and a short file is read
    // through into the next.
    #[test]
    fn consecutive_files_are_found_and_ordered_whatever_the_listing() {
        let mut files = consecutive(&[100_000, 50, 100_000]);
        let mut alone = test_header(4, 10);
        alone.start = alone.start.plus_seconds(-3600.0);
        // Listed: third, first, alone, second.
        let headers = vec![files.remove(2), files.remove(0), alone, files.remove(0)];
        let next = continuations(&headers);
        assert_eq!(next, [None, Some(3), None, Some(0)]);
        assert_eq!(search_order(&next), [1, 3, 0, 2]);
        let config = SearchConfig::default();
        // The 50-sample file is shorter than the overlap: read through into the third.
        assert_eq!(run_on_chain(1, &headers, &next, &config), [3, 0]);
        assert_eq!(run_on_chain(3, &headers, &next, &config), [0]);
        assert!(run_on_chain(2, &headers, &next, &config).is_empty());
        let chains = [vec![], vec![3, 0], vec![], vec![0]];
        let to_third = read_on_from(0, &headers, &chains);
        let tsamp = headers[0].tsamp_s;
        assert_eq!(to_third.len(), 2);
        for (p, offset_s) in to_third {
            let want = match p {
                1 => 100_050.0 * tsamp,
                3 => 50.0 * tsamp,
                _ => panic!("{p}"),
            };
            assert!((offset_s - want).abs() < 1e-9, "{p}: {offset_s}");
        }
        assert!(near_misses(&headers, &next).is_empty());
    }

    // Averaged files are joined on their own headers, whatever their lengths in
    // groups: a first file 12 samples over whole groups of 16 (averaged alone, it would
    // end 0.75 averaged samples before the next starts), then one shorter than a group,
    // read through into the third, as the first file's search reads on past the rest
    // of its last group and one block overlap.
    #[test]
    fn averaged_files_are_joined_whatever_their_lengths_in_groups() {
        let mut config = SearchConfig::default();
        config.average.samples = 16;
        let headers = consecutive(&[16 * 500 + 12, 10, 100_000]);
        let next = continuations(&headers);
        assert_eq!(next, [Some(1), Some(2), None]);
        assert!(near_misses(&headers, &next).is_empty());
        let own = config.average.run_on_header(&headers[0]).unwrap();
        assert_eq!(own.n_samples, 501);
        // Planned as in a long recording: the rest of its last group, then one block
        // overlap or, if more, what fills its block.
        let long = Header {
            n_samples: 1 << 30,
            ..own.clone()
        };
        let g = crate::search::block_layout(&long, &config).unwrap();
        let groups = (g.block_len as u64 - 501).max(g.overlap as u64);
        let wanted = crate::search::run_on_rows(&headers[0], &config).unwrap();
        assert_eq!(wanted, 4 + 16 * groups);
        assert_eq!(run_on_chain(0, &headers, &next, &config), [1, 2]);
        // The short file's own search owns one group, the next file's first 6 rows
        // completing it.
        let short = crate::search::run_on_rows(&headers[1], &config).unwrap();
        assert_eq!(short % 16, 6, "{short}");
        assert_eq!(run_on_chain(1, &headers, &next, &config), [2]);
        let tsamp = headers[0].tsamp_s;
        let chain = [1, 2];
        assert!(reached(&chain, &headers, 0.0).is_empty());
        assert_eq!(reached(&chain, &headers, 10.0 * tsamp), [1]);
        assert_eq!(reached(&chain, &headers, 11.0 * tsamp), [1, 2]);
    }

    // A file starting 0.75 samples after another ends is not joined, and said so.
    #[test]
    fn a_near_miss_is_named_with_its_gap() {
        let mut headers = consecutive(&[1000, 1000]);
        headers[1].start = headers[1].start.plus_seconds(0.75 * headers[0].tsamp_s);
        let next = continuations(&headers);
        assert_eq!(next, [None, None]);
        let misses = near_misses(&headers, &next);
        assert_eq!(misses.len(), 1);
        assert_eq!((misses[0].0, misses[0].1), (0, 1));
        assert!(misses[0].2.contains("0.75 samples"), "{}", misses[0].2);
    }
}
