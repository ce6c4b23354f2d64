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
    /// Trials between the DMs at which a boxcar of this width was tested (1 when
    /// every trial was): DM links scale with it.
    pub dm_stride: usize,
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

/// Whether `a` and `b` are friends: within `dm_link_trials` of the coarser one's
/// tested trials, and overlapping in time.
fn linked(a: &Detection, b: &Detection, dm_link_trials: usize, time_link_samples: u64) -> bool {
    let reach2 = (a.width_samples + b.width_samples) as u64 + 2 * time_link_samples;
    let dm_reach = dm_link_trials * a.dm_stride.max(b.dm_stride).max(1);
    a.dm_index.abs_diff(b.dm_index) <= dm_reach && a.centre2().abs_diff(b.centre2()) <= reach2
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

/// Where in the band the dispersion delays are referenced, for
/// [`merge_dispersion_tails`]. Quantities are k·ν⁻² in seconds per unit DM, with k the
/// dispersion constant.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sweep {
    /// Sample time in seconds.
    pub tsamp_s: f64,
    /// k/ν² of the highest channel (detections are timed there).
    pub top_s_per_dm: f64,
    /// k(ν_lo⁻² − ν_hi⁻²): the sweep across the band per unit DM.
    pub band_s_per_dm: f64,
}

/// Merges into each cluster the fainter clusters that lie on its "bow-tie": a pulse at
/// DM D and arrival t_inf, dedispersed at a trial DM d, is smeared over the residual
/// sweep from t_inf + (D − d)·kν_hi⁻² to t_inf + (D − d)·kν_lo⁻² (derived here from
/// the cold-plasma delay, Lorimer & Kramer 2005), and no brighter than that smearing
/// allows ([`Sweep::on_bow_tie`]). Bright pulses break into such fragments wherever a DM
/// gap interrupts the friends-of-friends chain. Clusters are taken in decreasing S/N;
/// output is in time order of the best member.
pub fn merge_dispersion_tails(
    mut clusters: Vec<Cluster>,
    sweep: &Sweep,
    slack_samples: f64,
) -> Vec<Cluster> {
    clusters.sort_by(|a, b| b.best.snr.total_cmp(&a.best.snr));
    let event = |d: &Detection| Event {
        t_inf_s: (d.start_sample as f64 + 0.5 * d.width_samples as f64) * sweep.tsamp_s
            - d.dm * sweep.top_s_per_dm,
        dm: d.dm,
        width_s: d.width_samples as f64 * sweep.tsamp_s,
        snr: d.snr,
    };
    let slack_s = slack_samples * sweep.tsamp_s;
    let mut leaders: Vec<Cluster> = Vec::new();
    for c in clusters {
        let host = leaders
            .iter_mut()
            .find(|l| sweep.on_bow_tie(&event(&l.best), &event(&c.best), slack_s));
        match host {
            Some(l) => {
                l.size += c.size;
                l.dm_lo = l.dm_lo.min(c.dm_lo);
                l.dm_hi = l.dm_hi.max(c.dm_hi);
            }
            None => leaders.push(c),
        }
    }
    leaders.sort_by_key(|c| c.best.start_sample);
    leaders
}

/// Where and how wide a detected pulse is.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Event {
    /// Inferred arrival at infinite frequency in seconds.
    pub t_inf_s: f64,
    /// DM in pc cm⁻³.
    pub dm: f64,
    /// Boxcar width in seconds.
    pub width_s: f64,
    /// Matched-filter S/N.
    pub snr: f64,
}

/// How much brighter than the even-smear estimate of [`Sweep::on_bow_tie`] an echo
/// may be. Delays go as ν⁻², so a pulse dedispersed at a wrong DM is smeared
/// unevenly (more of the band arrives per unit time near its top), and a band-limited
/// pulse is smeared over only its own part of the sweep: 3 covers a pulse whose
/// channels span a ninth of the band's sweep (common practice: a generous bound, so
/// that real echoes still merge).
const ECHO_SNR_MARGIN: f64 = 3.0;

impl Sweep {
    /// Whether `other` could be `leader` seen at a different trial DM: a pulse at DM
    /// D seen at trial d, timed at the top of the band, has each channel's signal at
    /// t_inf + (D − d)·kν⁻², so it spreads from (D − d)·kν_hi⁻² to (D − d)·kν_lo⁻²
    /// after t_inf; `other` must start within half the two widths of that span. The
    /// residual sweep |D − d|·k(ν_lo⁻² − ν_hi⁻²) widens the pulse to W_eff =
    /// √(W² + sweep²) — and, its fluence spread over W_eff, a boxcar matched to it keeps
    /// about √(W/W_eff) of its S/N (radiometer scaling, common practice). So `other`
    /// must also be no brighter than `ECHO_SNR_MARGIN` (3) times that: a fainter pulse
    /// of its own at a DM far from the leader's, where the leader's echo is far below
    /// the threshold, is not an echo even if it lies within the smeared sweep.
    ///
    /// (A window centred on the band's mean ν⁻² missed the low-frequency end of the
    /// span, where a very bright pulse left echoes as candidates of their own.)
    pub fn on_bow_tie(&self, leader: &Event, other: &Event, slack_s: f64) -> bool {
        let ddm = leader.dm - other.dm;
        let smeared = leader.width_s.hypot(ddm.abs() * self.band_s_per_dm);
        let kept = (ECHO_SNR_MARGIN * (leader.width_s / smeared).sqrt()).min(1.0);
        let top = ddm * self.top_s_per_dm;
        let bottom = ddm * (self.top_s_per_dm + self.band_s_per_dm);
        let margin = 0.5 * (leader.width_s + other.width_s) + slack_s;
        let dt = other.t_inf_s - leader.t_inf_s;
        dt >= top.min(bottom) - margin
            && dt <= top.max(bottom) + margin
            && other.snr <= leader.snr * kept
    }
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
            dm_stride: 1,
            dm: dm_index as f64 * 0.5,
            snr,
        }
    }

    // A wide boxcar tested every 8th trial links across its own stride, not the
    // narrow ones' single trials.
    #[test]
    fn links_scale_with_the_trial_stride() {
        let wide = |dm_index: usize| Detection {
            dm_stride: 8,
            ..det(1000, 64, dm_index, 9.0)
        };
        let c = friends_of_friends(&[wide(0), wide(8), wide(16), det(1000, 4, 60, 8.0)], 3, 2);
        assert_eq!(c.len(), 2);
        assert_eq!(c.iter().map(|c| c.size).max(), Some(3));
        let unstrided = Detection {
            dm_stride: 1,
            ..wide(8)
        };
        let c = friends_of_friends(&[det(1000, 64, 0, 9.0), unstrided], 3, 2);
        assert_eq!(c.len(), 2);
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

    /// A pulse at `dm` arriving at `t_inf_s`, `width_s` wide, of S/N `snr`.
    fn event(dm: f64, t_inf_s: f64, width_s: f64, snr: f64) -> Event {
        Event {
            t_inf_s,
            dm,
            width_s,
            snr,
        }
    }

    /// The sweep of a 1200–1600 MHz band sampled at 1 ms.
    fn sweep_1200_1600() -> Sweep {
        Sweep {
            tsamp_s: 1e-3,
            top_s_per_dm: 4.148808e3 / 1600f64.powi(2),
            band_s_per_dm: 4.148808e3 * (1200f64.powi(-2) - 1600f64.powi(-2)),
        }
    }

    #[test]
    fn a_fragment_on_the_bow_tie_merges_and_a_distant_event_does_not() {
        let sweep = sweep_1200_1600();
        let cluster = |d: Detection| Cluster {
            best: d,
            dm_lo: d.dm,
            dm_hi: d.dm,
            size: 1,
        };
        // Main pulse: DM 100, infinite-frequency arrival at sample 10 000.
        let at = |dm: f64, t_inf: f64, w: usize, snr: f64| {
            let start = t_inf + dm * sweep.top_s_per_dm / sweep.tsamp_s - 0.5 * w as f64;
            cluster(Detection {
                start_sample: start as u64,
                width_samples: w,
                dm_index: dm as usize,
                dm_stride: 1,
                dm,
                snr,
            })
        };
        let main = at(100.0, 10_000.0, 4, 20.0);
        // Seen at DM 150 it spreads over 50·kν⁻² = 81–144 samples earlier in t_inf.
        let fragment = at(150.0, 10_000.0 - 108.0, 32, 7.5);
        let elsewhere = at(150.0, 10_400.0, 4, 9.0);
        let merged =
            merge_dispersion_tails(vec![fragment.clone(), main.clone(), elsewhere], &sweep, 2.0);
        assert_eq!(merged.len(), 2);
        assert_eq!(merged[0].best, main.best);
        assert_eq!((merged[0].size, merged[0].dm_hi), (2, 150.0));
    }

    // Far from the leader's DM its echo is smeared over the whole residual sweep and
    // far below the threshold: a narrow, fainter pulse of its own that happens to lie
    // within that sweep stays a candidate, unless the leader is bright enough for its
    // echo to reach the other's S/N.
    #[test]
    fn a_distinct_pulse_within_a_faint_smeared_echo_is_not_merged() {
        let sweep = sweep_1200_1600();
        // DM 1200, 16 ms, S/N 12: at DM 40 its echo lies 1160·kν⁻² = 1.88–3.34 s later,
        // spread over 1.46 s, keeping √(16 ms / 1.46 s) ≈ 0.10 of its S/N.
        let leader = event(1200.0, 10.0, 16e-3, 12.0);
        let other = event(40.0, 10.0 + 2.507 + 0.3, 1e-3, 10.0);
        assert!(!sweep.on_bow_tie(&leader, &other, 0.0));
        let bright = Event {
            snr: 100.0,
            ..leader
        };
        assert!(sweep.on_bow_tie(&bright, &other, 0.0));
        // Near the leader's DM the bound is the leader's S/N itself.
        let near = event(
            1190.0,
            10.0 + 10.0 * 4.148808e3 / (1200.0 * 1600.0),
            16e-3,
            11.9,
        );
        assert!(sweep.on_bow_tie(&leader, &near, 0.0));
    }

    // A pulse of S/N 965 (DM 499.98, 2 ms; measured on a simulated 256-channel file)
    // left echoes of S/N 11 at DM 400.59 and 601.11, each near the low-frequency end of
    // its smear, 0.2836 s after and 0.2884 s before the pulse: the smear spans
    // 99.39·kν⁻² = 0.161–0.286 s and 101.13·kν⁻² = 0.164–0.291 s. Both merge; one
    // placed 10 ms beyond the end of the span does not.
    #[test]
    fn echoes_at_the_low_frequency_end_of_the_smear_merge() {
        let sweep = sweep_1200_1600();
        let leader = event(499.98, 5.0001, 2.048e-3, 965.4);
        let later = event(400.59, 5.2837, 1.024e-3, 11.3);
        let earlier = event(601.11, 4.7117, 1.024e-3, 10.6);
        assert!(sweep.on_bow_tie(&leader, &later, 0.0));
        assert!(sweep.on_bow_tie(&leader, &earlier, 0.0));
        // The span's two ends for the later echo, and 10 ms past either.
        let ddm = leader.dm - later.dm;
        let (top, bottom) = (
            ddm * sweep.top_s_per_dm,
            ddm * (sweep.top_s_per_dm + sweep.band_s_per_dm),
        );
        let margin = 0.5 * (leader.width_s + later.width_s);
        let at = |dt: f64| Event {
            t_inf_s: leader.t_inf_s + dt,
            ..later
        };
        assert!(sweep.on_bow_tie(&leader, &at(top), 0.0));
        assert!(sweep.on_bow_tie(&leader, &at(bottom), 0.0));
        assert!(!sweep.on_bow_tie(&leader, &at(top - margin - 0.010), 0.0));
        assert!(!sweep.on_bow_tie(&leader, &at(bottom + margin + 0.010), 0.0));
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

    // Each cluster, as (size, best member, DM range), against the components of the
    // brute-force pairing, with trial strides of 1–8 so the strided links are tested.
    #[test]
    fn matches_brute_force_pairs_on_random_detections() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(31);
        let summary = |c: &Cluster| {
            (
                c.size,
                c.best.start_sample,
                c.best.dm_index,
                c.dm_lo,
                c.dm_hi,
            )
        };
        for n in [0usize, 1, 2, 37, 200] {
            let d: Vec<Detection> = (0..n)
                .map(|_| Detection {
                    dm_stride: 1 << rng.random_range(0..4),
                    ..det(
                        rng.random_range(0..2000),
                        1 << rng.random_range(0..5),
                        rng.random_range(0..40),
                        rng.random_range(7.0..20.0),
                    )
                })
                .collect();
            let labels = reference_labels(&d, 2, 3);
            let mut expected: Vec<_> = (0..n)
                .filter(|&i| labels[i] == i)
                .map(|root| {
                    let members: Vec<&Detection> = (0..n)
                        .filter(|&j| labels[j] == root)
                        .map(|j| &d[j])
                        .collect();
                    let best = **members
                        .iter()
                        .max_by(|a, b| a.snr.total_cmp(&b.snr))
                        .unwrap();
                    let dm =
                        |f: fn(f64, f64) -> f64, from| members.iter().map(|m| m.dm).fold(from, f);
                    summary(&Cluster {
                        best,
                        dm_lo: dm(f64::min, f64::INFINITY),
                        dm_hi: dm(f64::max, f64::NEG_INFINITY),
                        size: members.len(),
                    })
                })
                .collect();
            let mut got: Vec<_> = friends_of_friends(&d, 2, 3).iter().map(summary).collect();
            let order = |a: &(usize, u64, usize, f64, f64), b: &(usize, u64, usize, f64, f64)| {
                a.partial_cmp(b).unwrap()
            };
            expected.sort_by(order);
            got.sort_by(order);
            assert_eq!(got, expected, "n={n}");
        }
    }
}
