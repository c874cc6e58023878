//! Photometry merged into fewer points for the search: the grid reads every point of every
//! trajectory on every map, so its time grows with the data, while most points of a long
//! survey season lie on a flat baseline where neighbours say the same thing.
//!
//! # The rule
//! Within each data set, neighbouring groups of points (at first one point each) are merged
//! cheapest first, where merging groups `a` and `b` costs what it adds to the chi^2 of each group
//! about its own weighted mean flux, `w_a w_b / (w_a + w_b) (F_a - F_b)^2` (Ward's criterion, Ward
//! 1963, J. Am. Stat. Assoc. 58, 236; `w = sum 1 / sigma^2`, `F` the weighted mean). A merge is
//! refused when it would cost more than [`MAX_MERGE_COST`] (the groups differ by two standard
//! errors) or span more than [`MAX_SPAN`] days. Merging stops once every set together holds at most
//! the target number of points (or no merge is allowed). A merged point has the weighted mean time
//! and flux, the error `1 / sqrt(w)` and the file line of its first point.
//!
//! Data within the target are left as they are. A caustic crossing, where the flux changes by
//! many errors from point to point, is merged last or not at all; a flat stretch first. The
//! chi^2 of a model on the merged data differs from that on every point by the groups' own
//! scatter (the same for every model) and by the model's curvature within a group. The cost
//! rule bounds the data's differences, not that curvature: on flat stretches it is below the
//! errors, so the search ranks trajectories as it would on every point, but beside a caustic
//! crossing it can exceed a merged point's smaller error (a refinement on merged data walked
//! a stellar binary's rho to 1e-34; docs/recovery.md). So only the search and the zoom read
//! merged data; the refinement fits every point.

use super::photometry::DataSet;
use std::cmp::Reverse;
use std::collections::BinaryHeap;

/// The most points the search and the zoom read by default; larger data are merged down to it
/// (on an invented close planet of 3,356 points merged into 1,500: the search 124 -> 79 s, the
/// zoom 105 -> 69 s, the same minimum; docs/recovery.md).
pub const SEARCH_POINTS: usize = 1500;
/// The largest chi^2 a merge may add (two standard errors between the groups' means).
pub const MAX_MERGE_COST: f64 = 4.0;
/// The longest time a merged point may span (days).
pub const MAX_SPAN: f64 = 1.0;

/// Data merged for the search.
#[derive(Debug, Clone, PartialEq)]
pub struct Merged {
    /// The data sets with their points merged (in the order given).
    pub sets: Vec<DataSet>,
    /// Points before and after.
    pub points: (usize, usize),
}

/// A group of neighbouring points of one set: index range and weighted sums.
#[derive(Debug, Clone, Copy)]
struct Group {
    first: usize,
    last: usize,
    w: f64,
    wt: f64,
    wf: f64,
    /// Neighbouring live groups (indices into the set's groups).
    prev: Option<usize>,
    next: Option<usize>,
    alive: bool,
    /// Bumped at each merge into this group, so that older queue entries are known stale.
    version: u32,
}

impl Group {
    fn cost(&self, other: &Group) -> f64 {
        let d = self.wf / self.w - other.wf / other.w;
        self.w * other.w / (self.w + other.w) * d * d
    }
}

/// A candidate merge in the queue: cost, set, left group and both groups' versions.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Candidate {
    cost: f64,
    set: usize,
    left: usize,
    versions: (u32, u32),
}

impl Eq for Candidate {}

impl Ord for Candidate {
    fn cmp(&self, other: &Self) -> std::cmp::Ordering {
        self.cost
            .total_cmp(&other.cost)
            .then(self.set.cmp(&other.set))
            .then(self.left.cmp(&other.left))
    }
}

impl PartialOrd for Candidate {
    fn partial_cmp(&self, other: &Self) -> Option<std::cmp::Ordering> {
        Some(self.cmp(other))
    }
}

/// `sets` merged by the module's rule until they hold at most `target` points together.
///
/// ```
/// use causeway::fit::bins::merge_for_search;
/// use causeway::fit::photometry::DataSet;
/// // 18 points on a flat baseline, then two 50 errors above it: merged into two points.
/// let mut text = String::from("t,flux,flux_err\n");
/// for k in 0..20 {
///     let f = if k < 18 { 10.0 } else { 60.0 };
///     text += &format!("{},{f},1\n", k as f64 * 0.05);
/// }
/// let set = DataSet::parse(&text, "a.csv", 22.0).unwrap();
/// let merged = merge_for_search(&[set], 2);
/// assert_eq!(merged.points, (20, 2));
/// let m = &merged.sets[0];
/// assert_eq!(m.flux, vec![10.0, 60.0]);
/// assert!((m.flux_err[0] - 1.0 / 18f64.sqrt()).abs() < 1e-12);
/// ```
pub fn merge_for_search(sets: &[DataSet], target: usize) -> Merged {
    let before: usize = sets.iter().map(DataSet::len).sum();
    if before <= target {
        return Merged {
            sets: sets.to_vec(),
            points: (before, before),
        };
    }
    let mut groups: Vec<Vec<Group>> = sets.iter().map(singletons).collect();
    let mut queue = BinaryHeap::new();
    for (s, g) in groups.iter().enumerate() {
        for left in 0..g.len().saturating_sub(1) {
            push(&mut queue, sets, g, s, left);
        }
    }
    let mut count = before;
    while count > target {
        let Some(Reverse(c)) = queue.pop() else { break };
        if c.cost > MAX_MERGE_COST {
            break;
        }
        let g = &mut groups[c.set];
        let Some(right) = g[c.left].next.filter(|_| g[c.left].alive) else {
            continue;
        };
        if (g[c.left].version, g[right].version) != c.versions || !g[right].alive {
            continue;
        }
        let r = g[right];
        let l = &mut g[c.left];
        l.last = r.last;
        l.w += r.w;
        l.wt += r.wt;
        l.wf += r.wf;
        l.next = r.next;
        l.version += 1;
        g[right].alive = false;
        if let Some(n) = r.next {
            g[n].prev = Some(c.left);
        }
        count -= 1;
        if let Some(p) = g[c.left].prev {
            push(&mut queue, sets, g, c.set, p);
        }
        push(&mut queue, sets, g, c.set, c.left);
    }
    let merged: Vec<DataSet> = sets
        .iter()
        .zip(&groups)
        .map(|(d, g)| collapse(d, g))
        .collect();
    Merged {
        sets: merged,
        points: (before, count),
    }
}

/// One group per point of `set`.
fn singletons(set: &DataSet) -> Vec<Group> {
    let n = set.len();
    (0..n)
        .map(|i| {
            let w = set.flux_err[i].powi(-2);
            Group {
                first: i,
                last: i,
                w,
                wt: w * set.times[i],
                wf: w * set.flux[i],
                prev: i.checked_sub(1),
                next: (i + 1 < n).then_some(i + 1),
                alive: true,
                version: 0,
            }
        })
        .collect()
}

/// Queues the merge of group `left` of set `s` with its next live group, if its span allows.
fn push(
    queue: &mut BinaryHeap<Reverse<Candidate>>,
    sets: &[DataSet],
    groups: &[Group],
    s: usize,
    left: usize,
) {
    let a = &groups[left];
    let Some(right) = a.next else { return };
    let b = &groups[right];
    if sets[s].times[b.last] - sets[s].times[a.first] > MAX_SPAN {
        return;
    }
    queue.push(Reverse(Candidate {
        cost: a.cost(b),
        set: s,
        left,
        versions: (a.version, b.version),
    }));
}

/// `set` with each live group of `groups` as one point.
fn collapse(set: &DataSet, groups: &[Group]) -> DataSet {
    let live: Vec<&Group> = groups.iter().filter(|g| g.alive).collect();
    DataSet {
        times: live.iter().map(|g| g.wt / g.w).collect(),
        flux: live.iter().map(|g| g.wf / g.w).collect(),
        flux_err: live.iter().map(|g| g.w.powf(-0.5)).collect(),
        lines: live.iter().map(|g| set.lines[g.first]).collect(),
        name: set.name.clone(),
        ..*set
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn set(times: &[f64], flux: &[f64], err: f64) -> DataSet {
        let mut text = String::from("t,flux,flux_err\n");
        for (t, f) in times.iter().zip(flux) {
            text += &format!("{t},{f},{err}\n");
        }
        DataSet::parse(&text, "s.csv", 22.0).unwrap()
    }

    #[test]
    fn weighted_means_are_kept() {
        // Sums of w, w t and w F are invariant under merging (definition of a weighted mean).
        let times: Vec<f64> = (0..200).map(|k| k as f64 * 0.01).collect();
        let flux: Vec<f64> = times.iter().map(|t| 5.0 + 0.01 * (7.0 * t).sin()).collect();
        let d = set(&times, &flux, 0.1);
        let m = merge_for_search(std::slice::from_ref(&d), 20);
        assert_eq!(m.points.1, 20);
        let sums = |d: &DataSet| {
            d.flux_err
                .iter()
                .zip(&d.flux)
                .zip(&d.times)
                .fold((0.0, 0.0, 0.0), |a, ((e, f), t)| {
                    let w = e.powi(-2);
                    (a.0 + w, a.1 + w * t, a.2 + w * f)
                })
        };
        let (a, b) = (sums(&d), sums(&m.sets[0]));
        assert!((a.0 / b.0 - 1.0).abs() < 1e-12);
        assert!((a.1 / b.1 - 1.0).abs() < 1e-12);
        assert!((a.2 / b.2 - 1.0).abs() < 1e-12);
        assert!(m.sets[0].times.windows(2).all(|w| w[0] < w[1]));
    }

    #[test]
    fn chi2_differences_between_models_are_kept() {
        // For models constant over each group, chi^2 on every point = chi^2 on the merged
        // points + the groups' own scatter (the weighted-variance decomposition, from memory),
        // so two such models differ by the same chi^2 either way.
        let times: Vec<f64> = (0..300).map(|k| k as f64 * 0.02).collect();
        let flux: Vec<f64> = (0..300)
            .map(|k| 3.0 + 0.05 * ((k * 7919) % 13) as f64)
            .collect();
        let d = set(&times, &flux, 0.2);
        let m = &merge_for_search(std::slice::from_ref(&d), 30).sets[0];
        let chi2 = |d: &DataSet, c: f64| -> f64 {
            d.flux
                .iter()
                .zip(&d.flux_err)
                .map(|(f, e)| ((f - c) / e).powi(2))
                .sum()
        };
        let (a, b) = (chi2(&d, 3.1) - chi2(&d, 3.4), chi2(m, 3.1) - chi2(m, 3.4));
        assert!((a - b).abs() < 1e-9 * a.abs(), "{a} {b}");
    }

    #[test]
    fn spans_and_costs_bound_the_merges() {
        // Points a day and a half apart never merge; nor do two levels 10 errors apart.
        let d = set(&[0.0, 1.5, 3.0, 4.5], &[1.0, 1.0, 1.0, 1.0], 0.1);
        assert_eq!(merge_for_search(&[d], 1).points.1, 4);
        let d = set(&[0.0, 0.1, 0.2, 0.3], &[1.0, 1.0, 2.0, 2.0], 0.1);
        let m = merge_for_search(&[d], 1);
        assert_eq!(m.points.1, 2);
        assert_eq!(m.sets[0].flux, vec![1.0, 2.0]);
    }

    #[test]
    fn within_target_is_untouched() {
        let d = set(&[0.0, 0.1, 0.2], &[1.0, 1.0, 1.0], 0.1);
        let m = merge_for_search(std::slice::from_ref(&d), 3);
        assert_eq!(m.sets[0], d);
    }
}
