//! The merge tree of the fast kernel, built once per plan step: which sub-band rows
//! are added, with which time shift, to form each row of the next level.
//!
//! This is the frequency-tree recursion of the Fast Dispersion Measure Transform
//! (Zackay & Ofek 2017, ApJ 835, 11) on channel *centres*: a node is a run of
//! adjacent channels (sorted by frequency, highest first) and its row `d` is the sum
//! along the dispersion curve with a total delay of `d` (downsampled) samples from its
//! highest to its lowest channel centre. Merging an upper node U with a lower node L:
//!
//! `node[d, t] = U[d_U, t] + L[d − s, t + s]`, with `d_U` the floor or ceil of `d·f_U`
//! and `s` that of `d·f_L` — whichever pair best fits the dispersion curve over the
//! node's channels (least squares) — where `f_U`, `f_L` are the fractions of the node's
//! ν⁻² span from its top to the bottom of U and to the top of L. Every path picks
//! exactly one sample per channel, like the reference kernel, so every output row has
//! the same noise (see `docs/dedisperse.md`).

use crate::units::delay_between_s;

/// One row of a level: `row[t] = prev[upper][t] + prev[lower][t + shift]`, needed for
/// `t < chunk + reach` (`lower = None` copies `upper`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Merge {
    pub upper: usize,
    pub lower: Option<usize>,
    pub shift: usize,
    pub reach: usize,
}

/// The tree for one [`super::DmStep`].
#[derive(Debug, Clone)]
pub(crate) struct StepTree {
    /// Levels above the channels; level 1 reads channel rows by channel index.
    pub levels: Vec<Vec<Merge>>,
    /// For each trial DM of the step, its row in the last level (or its channel if
    /// the band has one channel), and that row's total delay.
    pub dm_rows: Vec<usize>,
    pub dm_delays: Vec<usize>,
    /// For each trial, the delay of the band's top channel from the top of the whole
    /// band (samples): `top_offsets` rounded to fit the trial's path best.
    pub dm_offsets: Vec<usize>,
    /// Largest total path delay, downsampled samples.
    pub max_path: usize,
}

/// Least-squares summary of a row's path P (delays of its channels from the node top)
/// against fractions g of the node's ν⁻² span: Σ P², Σ P·g and Σ P. The squared
/// error against the ideal delays D·g is then `sq − 2D·cross + D²·Σg²`.
#[derive(Debug, Clone, Copy, Default)]
struct Fit {
    sq: f64,
    cross: f64,
    sum: f64,
}

/// Σ 1, Σ g and Σ g² over a node's channels.
#[derive(Debug, Clone, Copy, Default)]
struct Shape {
    n: f64,
    g1: f64,
    g2: f64,
}

impl Fit {
    fn error(&self, shape: &Shape, delay: f64) -> f64 {
        self.sq - 2.0 * delay * self.cross + delay * delay * shape.g2
    }
}

/// How a merged row is formed: upper row `du`, lower row `d − shift` at `shift`.
#[derive(Debug, Clone, Copy, Default)]
struct Choice {
    du: usize,
    shift: usize,
}

#[derive(Debug, Clone, Default)]
struct Node {
    /// First channel (index into the frequency-sorted order) and channel count.
    first: usize,
    count: usize,
    /// Children in the previous level: (upper, lower); `lower = None` passes through.
    children: Option<(usize, Option<usize>)>,
    /// Candidate delay rows `lo..=hi`.
    lo: usize,
    hi: usize,
    shape: Shape,
    /// Per candidate row: its path fit and (for merges) how it is formed.
    fits: Vec<Fit>,
    choices: Vec<Choice>,
    /// Per candidate row: needed by a trial, and its reach (largest delay from the
    /// band top to this node's top over the paths using it).
    used: Vec<bool>,
    reach: Vec<usize>,
    /// Per candidate row: its index in the level's buffer (channel index for leaves).
    index: Vec<usize>,
}

impl StepTree {
    /// Builds the tree for trial `dms` (pc cm⁻³, ascending) at `downsample`, for
    /// channel centres `freqs_mhz` in data order, with no path longer than
    /// `max_total` samples (so that no path reads past the block). `top_offsets`
    /// gives, per trial, the ideal delay (samples, not rounded) of this band's highest
    /// channel from the top of the whole band. An empty band yields a tree with no
    /// levels whose rows are never read.
    pub(crate) fn new(
        freqs_mhz: &[f64],
        dms: &[f64],
        top_offsets: &[f64],
        tsamp_s: f64,
        downsample: usize,
        max_total: usize,
    ) -> Self {
        if freqs_mhz.is_empty() {
            return StepTree {
                levels: Vec::new(),
                dm_rows: vec![0; dms.len()],
                dm_delays: vec![0; dms.len()],
                dm_offsets: top_offsets.iter().map(|y| y.round() as usize).collect(),
                max_path: 0,
            };
        }
        let mut order: Vec<usize> = (0..freqs_mhz.len()).collect();
        order.sort_by(|&a, &b| freqs_mhz[b].total_cmp(&freqs_mhz[a]));
        let inv2 = |i: usize| freqs_mhz[order[i]].powi(-2);
        let sample_s = tsamp_s * downsample as f64;
        let span_s_per_dm =
            delay_between_s(1.0, freqs_mhz[order[order.len() - 1]], freqs_mhz[order[0]]);
        let ideal = |dm: f64| dm * span_s_per_dm / sample_s;

        let mut levels = pair_up(&order);
        let top = levels.len() - 1;
        let (lo, hi) = match (dms.first(), dms.last()) {
            (Some(&a), Some(&b)) => (
                (ideal(a).floor() as usize).min(max_total),
                (ideal(b).ceil() as usize).min(max_total),
            ),
            _ => (0, 0),
        };
        let root = &mut levels[top][0];
        (root.lo, root.hi) = if top == 0 { (0, 0) } else { (lo, hi) };

        // Fractions (f_U, f_L) of a node's ν⁻² span: top → bottom of U, top → top of L.
        let fractions = |node: &Node, upper_count: usize| {
            let top = inv2(node.first);
            let span = inv2(node.first + node.count - 1) - top;
            if span <= 0.0 {
                return (0.0, 0.0);
            }
            let last_u = node.first + upper_count - 1;
            ((inv2(last_u) - top) / span, (inv2(last_u + 1) - top) / span)
        };
        let floor = |d: usize, f: f64| (d as f64 * f).floor() as usize;
        let ceil = |d: usize, f: f64| (d as f64 * f).ceil() as usize;

        // Top-down: the candidate rows each node must offer (floor and ceil of the
        // ideal split of every candidate row of its parent).
        for l in (1..=top).rev() {
            let (below, here) = levels.split_at_mut(l);
            for node in &here[0] {
                let prev = &mut below[l - 1];
                let (u, lower) = node.children.expect("levels above 0 have children");
                match lower {
                    None => (prev[u].lo, prev[u].hi) = (node.lo, node.hi),
                    Some(lw) => {
                        let (f_u, f_l) = fractions(node, prev[u].count);
                        let widen = |child: &mut Node, lo: usize, hi: usize| {
                            (child.lo, child.hi) = match child.count {
                                1 => (0, 0),
                                _ => (lo, hi),
                            };
                        };
                        widen(&mut prev[u], floor(node.lo, f_u), ceil(node.hi, f_u));
                        widen(
                            &mut prev[lw],
                            node.lo - ceil(node.lo, f_l),
                            node.hi - floor(node.hi, f_l),
                        );
                    }
                }
            }
        }

        // Bottom-up: each row takes the split whose path best fits the dispersion
        // curve (least squares over its channels).
        for node in &mut levels[0] {
            node.shape = Shape {
                n: 1.0,
                g1: 0.0,
                g2: 0.0,
            };
            node.fits = vec![Fit::default()];
            node.choices = vec![Choice::default()];
        }
        for l in 1..=top {
            let (below, here) = levels.split_at_mut(l);
            let prev = &below[l - 1];
            for node in &mut here[0] {
                let (u, lower) = node.children.expect("levels above 0 have children");
                let up = &prev[u];
                let Some(lw) = lower else {
                    node.shape = up.shape;
                    node.fits = up.fits[node.lo - up.lo..=node.hi - up.lo].to_vec();
                    node.choices = (node.lo..=node.hi)
                        .map(|d| Choice { du: d, shift: 0 })
                        .collect();
                    continue;
                };
                let low = &prev[lw];
                let (f_u, f_l) = fractions(node, up.count);
                node.shape = merged_shape(&up.shape, &low.shape, f_u, f_l);
                (node.fits, node.choices) = (node.lo..=node.hi)
                    .map(|d| best_split(d, up, low, f_u, f_l))
                    .unzip();
            }
        }

        // Each trial takes, of the two rows around its ideal delay, the one that fits
        // the dispersion curve best once the node's top is given its best whole-sample
        // delay from the band top (least squares over the node's channels): a path
        // whose channels lag on average is moved earlier as a whole.
        let root = &levels[top][0];
        let (dm_d, dm_offsets): (Vec<usize>, Vec<usize>) = dms
            .iter()
            .zip(top_offsets)
            .map(|(&dm, &y)| {
                let x = ideal(dm);
                let rows = (x.floor() as usize).clamp(root.lo, root.hi)
                    ..=(x.ceil() as usize).clamp(root.lo, root.hi);
                rows.flat_map(|d| {
                    let fit = &root.fits[d - root.lo];
                    let n = root.shape.n;
                    let bias = fit.sum - x * root.shape.g1;
                    let best = y - bias / n;
                    let offsets =
                        (best.floor().max(0.0) as usize)..=(best.ceil().max(0.0) as usize);
                    offsets.map(move |o| {
                        let delta = o as f64 - y;
                        let err =
                            fit.error(&root.shape, x) + 2.0 * delta * bias + n * delta * delta;
                        (err, d, o)
                    })
                })
                .min_by(|a, b| a.0.total_cmp(&b.0))
                .map(|(_, d, o)| (d, o))
                .expect("a node offers at least one row")
            })
            .unzip();
        mark_used(&mut levels, &dm_d);
        let merges = index_rows(&mut levels, &order);
        let root = &levels[top][0];
        StepTree {
            levels: merges,
            dm_rows: dm_d.iter().map(|&d| root.index[d - root.lo]).collect(),
            max_path: dm_d.iter().copied().max().unwrap_or(0),
            dm_delays: dm_d,
            dm_offsets,
        }
    }

    /// Rows of the last level (the channel itself for a one-channel band).
    pub(crate) fn n_top_rows(&self, n_chan: usize) -> usize {
        self.levels.last().map_or(n_chan.min(1), Vec::len)
    }

    /// Row in the last level, total delay and delay of the band's top for trial `k`.
    pub(crate) fn top_row(&self, k: usize) -> (usize, usize, usize) {
        (self.dm_rows[k], self.dm_delays[k], self.dm_offsets[k])
    }

    /// Additions per output sample of the levels above the first `skip`: one per
    /// merged row.
    pub(crate) fn adds_per_sample(&self, skip: usize) -> usize {
        self.levels
            .iter()
            .skip(skip)
            .flatten()
            .filter(|m| m.lower.is_some())
            .count()
    }

    /// The channels on the path of every row of level `depth` (≥ 1; level 1 merges
    /// channels): per row, each channel's index and its delay from the row's top, so
    /// that `row[t] = Σ channel[t + delay]`.
    pub(crate) fn taps(&self, depth: usize) -> Vec<Vec<(usize, usize)>> {
        (0..self.levels[depth - 1].len())
            .map(|r| trace(&self.levels[..depth], r))
            .collect()
    }

    /// The delay (downsampled samples) this tree applies to each channel (data order)
    /// for trial `k`: the path traced back down the levels.
    #[cfg(test)]
    pub(crate) fn path_delays(&self, k: usize, n_chan: usize) -> Vec<usize> {
        let mut delays = vec![0; n_chan];
        for (c, t) in trace(&self.levels, self.dm_rows[k]) {
            delays[c] = t;
        }
        delays
    }
}

/// Row `row` of the last of `levels` traced back to the channels: each channel on its
/// path and that channel's delay from the row's top.
fn trace(levels: &[Vec<Merge>], row: usize) -> Vec<(usize, usize)> {
    let mut frontier = vec![(row, 0usize)];
    for level in levels.iter().rev() {
        frontier = frontier
            .into_iter()
            .flat_map(|(r, t)| {
                let m = level[r];
                std::iter::once((m.upper, t)).chain(m.lower.map(|l| (l, t + m.shift)))
            })
            .collect();
    }
    frontier
}

/// Level 0 holds one node per channel (frequency order); each next level pairs
/// neighbours, passing an odd one through, until one node covers the band.
fn pair_up(order: &[usize]) -> Vec<Vec<Node>> {
    let mut levels = vec![
        (0..order.len())
            .map(|i| Node {
                first: i,
                count: 1,
                ..Node::default()
            })
            .collect::<Vec<_>>(),
    ];
    while let Some(prev) = levels.last().filter(|l| l.len() > 1) {
        let next = (0..prev.len().div_ceil(2))
            .map(|k| {
                let lower = prev.get(2 * k + 1);
                Node {
                    first: prev[2 * k].first,
                    count: prev[2 * k].count + lower.map_or(0, |l| l.count),
                    children: Some((2 * k, lower.map(|_| 2 * k + 1))),
                    ..Node::default()
                }
            })
            .collect();
        levels.push(next);
    }
    levels
}

/// Σ1, Σg, Σg² of a merged node: upper channels sit at g·f_U, lower ones at
/// f_L + g·(1 − f_L).
fn merged_shape(up: &Shape, low: &Shape, f_u: f64, f_l: f64) -> Shape {
    let w = 1.0 - f_l;
    Shape {
        n: up.n + low.n,
        g1: f_u * up.g1 + low.n * f_l + w * low.g1,
        g2: f_u * f_u * up.g2 + low.n * f_l * f_l + 2.0 * f_l * w * low.g1 + w * w * low.g2,
    }
}

/// The floor/ceil split of row `d` with the smallest squared path error.
fn best_split(d: usize, up: &Node, low: &Node, f_u: f64, f_l: f64) -> (Fit, Choice) {
    let x = d as f64;
    let (x_u, x_l) = (x * f_u, x * (1.0 - f_l));
    let mut best: Option<(f64, Fit, Choice)> = None;
    let around = |v: f64| (v.floor() as usize)..=(v.ceil() as usize).min(d);
    for du in around(x_u) {
        let Some(fu) = du.checked_sub(up.lo).and_then(|i| up.fits.get(i)) else {
            continue;
        };
        let e_u = fu.error(&up.shape, x_u);
        for shift in around(x * f_l) {
            let Some(fl) = d
                .checked_sub(shift)
                .and_then(|dl| dl.checked_sub(low.lo))
                .and_then(|i| low.fits.get(i))
            else {
                continue;
            };
            let (s, n) = (shift as f64, low.shape.n);
            let delta = s - x * f_l;
            let e_l = fl.error(&low.shape, x_l)
                + 2.0 * delta * (fl.sum - x_l * low.shape.g1)
                + n * delta * delta;
            let fit = Fit {
                sq: fu.sq + fl.sq + 2.0 * s * fl.sum + n * s * s,
                cross: f_u * fu.cross
                    + f_l * (n * s + fl.sum)
                    + (1.0 - f_l) * (s * low.shape.g1 + fl.cross),
                sum: fu.sum + fl.sum + n * s,
            };
            if best.as_ref().is_none_or(|b| e_u + e_l < b.0) {
                best = Some((e_u + e_l, fit, Choice { du, shift }));
            }
        }
    }
    let (_, fit, choice) = best.expect("candidate ranges cover floor and ceil splits");
    (fit, choice)
}

/// Top-down: flags the rows the trials need and the reach of each.
fn mark_used(levels: &mut [Vec<Node>], root_rows: &[usize]) {
    for node in levels.iter_mut().flatten() {
        let n = node.hi - node.lo + 1;
        node.used = vec![false; n];
        node.reach = vec![0; n];
    }
    let top = levels.len() - 1;
    let root = &mut levels[top][0];
    for &d in root_rows {
        root.used[d - root.lo] = true;
    }
    for l in (1..=top).rev() {
        let (below, here) = levels.split_at_mut(l);
        let prev = &mut below[l - 1];
        for node in &here[0] {
            let (u, lower) = node.children.expect("levels above 0 have children");
            for (i, choice) in node.choices.iter().enumerate() {
                if !node.used[i] {
                    continue;
                }
                let (d, reach) = (node.lo + i, node.reach[i]);
                let mark = |child: &mut Node, row: usize, reach: usize| {
                    let j = row - child.lo;
                    child.used[j] = true;
                    child.reach[j] = child.reach[j].max(reach);
                };
                mark(&mut prev[u], choice.du, reach);
                if let Some(lw) = lower {
                    mark(&mut prev[lw], d - choice.shift, reach + choice.shift);
                }
            }
        }
    }
}

/// Bottom-up: buffer indices of the used rows and the merge list of each level.
fn index_rows(levels: &mut [Vec<Node>], order: &[usize]) -> Vec<Vec<Merge>> {
    for node in &mut levels[0] {
        node.index = vec![order[node.first]];
    }
    let mut merges_per_level = Vec::with_capacity(levels.len() - 1);
    for l in 1..levels.len() {
        let (below, here) = levels.split_at_mut(l);
        let prev = &below[l - 1];
        let mut merges = Vec::new();
        for node in &mut here[0] {
            let (u, lower) = node.children.expect("levels above 0 have children");
            node.index = vec![usize::MAX; node.used.len()];
            for (i, choice) in node.choices.iter().enumerate() {
                if !node.used[i] {
                    continue;
                }
                node.index[i] = merges.len();
                let row = |child: &Node, d: usize| child.index[d - child.lo];
                merges.push(Merge {
                    upper: row(&prev[u], choice.du),
                    lower: lower.map(|lw| row(&prev[lw], node.lo + i - choice.shift)),
                    shift: choice.shift,
                    reach: node.reach[i],
                });
            }
        }
        merges_per_level.push(merges);
    }
    merges_per_level
}
