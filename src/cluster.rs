//! Friends-of-friends clustering of detections in (time, DM, width): two detections
//! are friends when their trial DMs are within a few trials of each other and their
//! boxcars overlap in time (half the summed widths plus a slack); clusters are the
//! connected groups, each represented by its highest-S/N member (Cordes et al. 2004,
//! ApJ 612, 375, link detections in time; the (t, DM) generalisation is common
//! practice, e.g. Pang et al. 2018, MNRAS 480, 3302).

/// One threshold crossing of the matched filter.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Detection {
    /// First input sample of the boxcar, counted from the start of the file, at the
    /// arrival time of the highest-frequency channel.
    pub start_sample: u64,
    /// Boxcar width in input samples.
    pub width_samples: usize,
    /// Position of the trial DM in the plan's ascending list of all trials.
    pub dm_index: usize,
    /// Trial DM in pc cm⁻³.
    pub dm: f64,
    /// Matched-filter S/N.
    pub snr: f64,
}

impl Detection {
    /// Centre of the boxcar in input samples (twice, to stay in integers).
    fn centre2(&self) -> u64 {
        2 * self.start_sample + self.width_samples as u64
    }
}

/// A group of linked detections.
#[derive(Debug, Clone, PartialEq)]
pub struct Cluster {
    /// The member with the highest S/N.
    pub best: Detection,
    /// Lowest member DM in pc cm⁻³.
    pub dm_lo: f64,
    /// Highest member DM in pc cm⁻³.
    pub dm_hi: f64,
    /// Number of members.
    pub size: usize,
}

/// Whether `a` and `b` are friends.
fn linked(a: &Detection, b: &Detection, dm_link_trials: usize, time_link_samples: u64) -> bool {
    let reach2 = (a.width_samples + b.width_samples) as u64 + 2 * time_link_samples;
    a.dm_index.abs_diff(b.dm_index) <= dm_link_trials && a.centre2().abs_diff(b.centre2()) <= reach2
}

fn find(parent: &mut [usize], mut i: usize) -> usize {
    while parent[i] != i {
        parent[i] = parent[parent[i]];
        i = parent[i];
    }
    i
}

/// Clusters `detections` by friends-of-friends; clusters come out in time order of
/// their best member.
pub fn friends_of_friends(
    detections: &[Detection],
    dm_link_trials: usize,
    time_link_samples: u64,
) -> Vec<Cluster> {
    let mut order: Vec<usize> = (0..detections.len()).collect();
    order.sort_by_key(|&i| detections[i].centre2());
    let max_width = detections
        .iter()
        .map(|d| d.width_samples)
        .max()
        .unwrap_or(0) as u64;
    let mut parent: Vec<usize> = (0..detections.len()).collect();
    for (k, &i) in order.iter().enumerate() {
        let a = &detections[i];
        // Beyond this centre separation nobody later in time can be a friend.
        let horizon = a.centre2() + a.width_samples as u64 + max_width + 2 * time_link_samples;
        for &j in &order[k + 1..] {
            let b = &detections[j];
            if b.centre2() > horizon {
                break;
            }
            if linked(a, b, dm_link_trials, time_link_samples) {
                let (ra, rb) = (find(&mut parent, i), find(&mut parent, j));
                parent[ra.max(rb)] = ra.min(rb);
            }
        }
    }
    let mut clusters: Vec<Option<Cluster>> = vec![None; detections.len()];
    for (i, d) in detections.iter().enumerate() {
        let root = find(&mut parent, i);
        let c = clusters[root].get_or_insert(Cluster {
            best: *d,
            dm_lo: d.dm,
            dm_hi: d.dm,
            size: 0,
        });
        c.size += 1;
        c.dm_lo = c.dm_lo.min(d.dm);
        c.dm_hi = c.dm_hi.max(d.dm);
        if d.snr > c.best.snr {
            c.best = *d;
        }
    }
    let mut out: Vec<Cluster> = clusters.into_iter().flatten().collect();
    out.sort_by_key(|c| c.best.start_sample);
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    fn det(start: u64, width: usize, dm_index: usize, snr: f64) -> Detection {
        Detection {
            start_sample: start,
            width_samples: width,
            dm_index,
            dm: dm_index as f64 * 0.5,
            snr,
        }
    }

    #[test]
    fn one_event_across_dms_and_widths_is_one_cluster() {
        let event: Vec<Detection> = (0..10)
            .flat_map(|d| {
                [
                    det(1000 + d, 4, 20 + d as usize, 8.0 + d as f64 % 3.0),
                    det(998, 8, 20 + d as usize, 7.5),
                ]
            })
            .collect();
        let mut all = event.clone();
        all.push(det(5000, 4, 21, 9.0)); // another event later
        all.push(det(1002, 4, 60, 7.2)); // same time, far DM
        let c = friends_of_friends(&all, 3, 2);
        assert_eq!(c.len(), 3);
        assert_eq!(c[0].size + c[1].size, 21);
        let big = c.iter().find(|c| c.size == 20).unwrap();
        assert_eq!(big.best.snr, 10.0);
        assert_eq!((big.dm_lo, big.dm_hi), (10.0, 14.5));
    }

    /// Reference: every pair tested, components by repeated relabelling.
    fn reference_labels(d: &[Detection], link_dm: usize, link_t: u64) -> Vec<usize> {
        let mut label: Vec<usize> = (0..d.len()).collect();
        loop {
            let mut changed = false;
            for i in 0..d.len() {
                for j in 0..d.len() {
                    if linked(&d[i], &d[j], link_dm, link_t) && label[j] > label[i] {
                        label[j] = label[i];
                        changed = true;
                    }
                }
            }
            if !changed {
                return label;
            }
        }
    }

    #[test]
    fn matches_brute_force_pairs_on_random_detections() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(31);
        for n in [0usize, 1, 2, 37, 200] {
            let d: Vec<Detection> = (0..n)
                .map(|_| {
                    det(
                        rng.random_range(0..2000),
                        1 << rng.random_range(0..5),
                        rng.random_range(0..40),
                        rng.random_range(7.0..20.0),
                    )
                })
                .collect();
            let labels = reference_labels(&d, 2, 3);
            let mut sizes: Vec<usize> = {
                let mut m = std::collections::HashMap::new();
                for l in &labels {
                    *m.entry(*l).or_insert(0usize) += 1;
                }
                m.into_values().collect()
            };
            sizes.sort_unstable();
            let mut got: Vec<usize> = friends_of_friends(&d, 2, 3)
                .iter()
                .map(|c| c.size)
                .collect();
            got.sort_unstable();
            assert_eq!(got, sizes, "n={n}");
        }
    }
}
