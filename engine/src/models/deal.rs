//! Random assignments of n units to groups of fixed sizes, for the one-factor randomisation
//! test, without moving the values: the groups are bit masks over the units.
//!
//! Method. The groups form a binary tree (each internal node splits its range of groups in
//! two). At a node with member set M (a bit mask) and a left part that must hold a units: every
//! member goes left on a fair random bit (one 64-bit word gives 64 members' bits; nodes at the
//! same depth are disjoint and share the words); then, while the left part holds x > a members,
//! a uniformly chosen left member moves right (x < a: a right member moves left). Members are
//! chosen by rejection: a uniform index over all n units (or over M's list of members when M
//! is small) is accepted when it is on the wanted side. The assignment is uniform over all
//! assignments with the given group sizes:
//!
//! ```text
//! given x, the fair bits make the left part uniform over the x-subsets of M             (1)
//! moving x − a uniform members out: P(left = T) = C(m − a, x − a) / (C(m, x) C(x, x − a))
//!   for every a-subset T — the same for all T; likewise for x < a                         (2)
//! the children are then split independently, so the whole assignment is uniform          (3)
//! ```
//!
//! A group's sum is read from a table of the sums of every subset of four consecutive values
//! (16 entries per four units, so one lookup per four units), or, for more than 65,536 units
//! (table above 2 MiB), by visiting the set bits. Indices come from `rand`'s uniform range
//! sampling.

use rand::Rng;
use rand_xoshiro::Xoshiro256PlusPlus as Gen;

/// Units up to which group sums come from the subset-sum table.
const TABLE_UNITS: usize = 65_536;

#[derive(Debug, Clone)]
struct Node {
    /// Groups lo..mid go left, the rest of the node's range right.
    lo: usize,
    mid: usize,
    /// Units the left part must hold.
    left_size: usize,
    depth: usize,
    /// Tree slots of the children (`usize::MAX`: the child is the group itself).
    left: usize,
    right: usize,
}

/// Draws assignments of `values` to groups of sizes `counts` and gives each group's sum.
#[derive(Debug, Clone)]
pub struct Dealer {
    n: usize,
    words: usize,
    nodes: Vec<Node>,
    /// Member mask of each node (slot = node index), then of each group.
    masks: Vec<Vec<u64>>,
    group_mask: Vec<Vec<u64>>,
    planes: Vec<Vec<u64>>,
    table: Vec<f64>,
    values: Vec<f64>,
    total: f64,
    members: Vec<u32>,
    /// Each group's sum after [`Dealer::deal`].
    pub sums: Vec<f64>,
}

fn build(nodes: &mut Vec<Node>, counts: &[usize], lo: usize, hi: usize, depth: usize) -> usize {
    let mid = (lo + hi) / 2;
    let at = nodes.len();
    nodes.push(Node {
        lo,
        mid,
        left_size: counts[lo..mid].iter().sum(),
        depth,
        left: usize::MAX,
        right: usize::MAX,
    });
    if mid - lo > 1 {
        let l = build(nodes, counts, lo, mid, depth + 1);
        nodes[at].left = l;
    }
    if hi - mid > 1 {
        let r = build(nodes, counts, mid, hi, depth + 1);
        nodes[at].right = r;
    }
    at
}

impl Dealer {
    /// A dealer for `values` (any order) into groups of `counts` (summing to the number of
    /// values; at least two groups).
    pub fn new(values: &[f64], counts: &[usize]) -> Dealer {
        let n = values.len();
        debug_assert_eq!(counts.iter().sum::<usize>(), n);
        let words = n.div_ceil(64);
        let mut nodes = Vec::new();
        if counts.len() > 1 {
            build(&mut nodes, counts, 0, counts.len(), 0);
        }
        let depth = nodes.iter().map(|d| d.depth + 1).max().unwrap_or(0);
        let table = if n <= TABLE_UNITS {
            // Whole words of 16 chunks (entries past the last unit are never looked up with
            // a set bit, so they stay 0).
            let mut t = vec![0.0; words * 256];
            for c in 0..n.div_ceil(4) {
                for b in 0..16usize {
                    let mut s = 0.0;
                    for j in 0..4 {
                        if b >> j & 1 == 1 && 4 * c + j < n {
                            s += values[4 * c + j];
                        }
                    }
                    t[c * 16 + b] = s;
                }
            }
            t
        } else {
            Vec::new()
        };
        Dealer {
            n,
            words,
            masks: vec![vec![0; words]; nodes.len()],
            nodes,
            group_mask: vec![vec![0; words]; counts.len()],
            planes: vec![vec![0; words]; depth],
            table,
            values: values.to_vec(),
            total: values.iter().sum(),
            members: Vec::new(),
            sums: vec![0.0; counts.len()],
        }
    }

    /// Draws one assignment; the group sums are in `sums`.
    pub fn deal(&mut self, rng: &mut Gen) {
        let k = self.sums.len();
        if k < 2 {
            self.sums[0] = self.total;
            return;
        }
        for plane in self.planes.iter_mut() {
            for w in plane.iter_mut() {
                *w = rand::RngCore::next_u64(rng);
            }
        }
        // Root: every unit.
        let mut root = std::mem::take(&mut self.masks[0]);
        for (i, w) in root.iter_mut().enumerate() {
            let bits = (self.n - 64 * i).min(64);
            *w = if bits == 64 {
                u64::MAX
            } else {
                (1u64 << bits) - 1
            };
        }
        self.masks[0] = root;
        for at in 0..self.nodes.len() {
            self.split(at, rng);
        }
        let mut total_rest = 0.0;
        for g in 0..k - 1 {
            let s = self.mask_sum(g);
            self.sums[g] = s;
            total_rest += s;
        }
        self.sums[k - 1] = self.total - total_rest;
    }

    fn mask_sum(&self, g: usize) -> f64 {
        let mask = &self.group_mask[g];
        if self.table.is_empty() {
            let mut s = 0.0;
            for (i, &w) in mask.iter().enumerate() {
                let mut w = w;
                while w != 0 {
                    s += self.values[64 * i + w.trailing_zeros() as usize];
                    w &= w - 1;
                }
            }
            return s;
        }
        let mut acc = [0.0f64; 4];
        for (&w, t) in mask.iter().zip(self.table.chunks_exact(256)) {
            for c in (0..16).step_by(4) {
                for (j, a) in acc.iter_mut().enumerate() {
                    let nib = (w >> (4 * (c + j)) & 15) as usize;
                    *a += t[(c + j) * 16 + nib];
                }
            }
        }
        (acc[0] + acc[1]) + (acc[2] + acc[3])
    }

    fn split(&mut self, at: usize, rng: &mut Gen) {
        let node = self.nodes[at].clone();
        let members = std::mem::take(&mut self.masks[at]);
        let plane = &self.planes[node.depth];
        let mut left = vec_slot(&mut self.group_mask, &mut self.masks, &node, true);
        let mut right = vec_slot(&mut self.group_mask, &mut self.masks, &node, false);
        let mut x = 0usize;
        for i in 0..self.words {
            left[i] = members[i] & plane[i];
            right[i] = members[i] & !plane[i];
            x += left[i].count_ones() as usize;
        }
        let m: usize = members.iter().map(|w| w.count_ones() as usize).sum();
        let a = node.left_size;
        if x != a {
            // Small nodes: choose among their own members rather than among all units.
            let listed = m * 8 < self.n;
            if listed {
                self.members.clear();
                for (i, &w) in members.iter().enumerate() {
                    let mut w = w;
                    while w != 0 {
                        self.members.push((64 * i) as u32 + w.trailing_zeros());
                        w &= w - 1;
                    }
                }
            }
            let (from, to, mut moves) = if x > a {
                (&mut left, &mut right, x - a)
            } else {
                (&mut right, &mut left, a - x)
            };
            while moves > 0 {
                let u = if listed {
                    let j = rng.random_range(0..m as u32) as usize;
                    self.members[j] as usize
                } else {
                    rng.random_range(0..self.n as u32) as usize
                };
                // Without a branch on the (unpredictable) hit: a miss moves nothing.
                let (w, s) = (u / 64, u % 64);
                let hit = from[w] >> s & 1;
                from[w] &= !(hit << s);
                to[w] |= hit << s;
                moves -= hit as usize;
            }
        }
        self.masks[at] = members;
        put_slot(&mut self.group_mask, &mut self.masks, &node, true, left);
        put_slot(&mut self.group_mask, &mut self.masks, &node, false, right);
    }
}

/// Takes the mask buffer of a node's child (a group's mask when the child is one group).
fn vec_slot(groups: &mut [Vec<u64>], nodes: &mut [Vec<u64>], n: &Node, left: bool) -> Vec<u64> {
    match (left, n.left, n.right) {
        (true, usize::MAX, _) => std::mem::take(&mut groups[n.lo]),
        (true, l, _) => std::mem::take(&mut nodes[l]),
        (false, _, usize::MAX) => std::mem::take(&mut groups[n.mid]),
        (false, _, r) => std::mem::take(&mut nodes[r]),
    }
}

fn put_slot(groups: &mut [Vec<u64>], nodes: &mut [Vec<u64>], n: &Node, left: bool, v: Vec<u64>) {
    match (left, n.left, n.right) {
        (true, usize::MAX, _) => groups[n.lo] = v,
        (true, l, _) => nodes[l] = v,
        (false, _, usize::MAX) => groups[n.mid] = v,
        (false, _, r) => nodes[r] = v,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use std::collections::HashMap;

    /// χ² of the observed assignments (by the group of each unit) against the uniform
    /// distribution over all `cells` of them.
    fn chi2_of(counts: &[usize], draws: usize, seed: u64) -> (usize, f64) {
        let n: usize = counts.iter().sum();
        // Distinct powers of two as values: a group's sum says exactly which units it holds.
        let values: Vec<f64> = (0..n).map(|i| (1u64 << i) as f64).collect();
        let mut d = Dealer::new(&values, counts);
        let mut rng = Gen::seed_from_u64(seed);
        let mut seen: HashMap<Vec<u64>, usize> = HashMap::new();
        for _ in 0..draws {
            d.deal(&mut rng);
            let key: Vec<u64> = d.sums.iter().map(|&s| s as u64).collect();
            for (g, &k) in key.iter().enumerate() {
                assert_eq!(k.count_ones() as usize, counts[g], "group sizes kept");
            }
            *seen.entry(key).or_default() += 1;
        }
        let cells = seen.len();
        // multinomial coefficient n! / Π counts!
        let mut total: f64 = (1..=n).map(|i| i as f64).product();
        for &c in counts {
            total /= (1..=c).map(|i| i as f64).product::<f64>();
        }
        assert_eq!(cells, total as usize, "every assignment occurs");
        let e = draws as f64 / total;
        (
            cells,
            seen.values().map(|&c| (c as f64 - e).powi(2) / e).sum(),
        )
    }

    #[test]
    fn equal_groups_are_uniform_over_assignments() {
        // 6!/(2!2!2!) = 90 assignments, χ² with 89 df; its 1e-6 upper quantile is 167.35
        // (scipy chi2.isf(1e-6, 89) = 167.35); the seed is fixed.
        let (cells, chi2) = chi2_of(&[2, 2, 2], 180_000, 5);
        assert_eq!(cells, 90);
        assert!(chi2 < 167.35, "chi2 = {chi2}");
    }

    #[test]
    fn unequal_groups_and_small_nodes_are_uniform_too() {
        // 6!/(1!2!3!) = 60 assignments, 59 df: 1e-6 quantile 125.66 (scipy chi2.isf).
        let (_, chi2) = chi2_of(&[1, 2, 3], 120_000, 9);
        assert!(chi2 < 125.66, "chi2 = {chi2}");
        // 20!/(18!·1!·1!) = 380 assignments; the node holding the two one-unit groups is small
        // (2 · 8 < 20), so its members are chosen from its own list. 379 df: 1e-6 quantile
        // 524.5 (scipy chi2.isf(1e-6, 379) = 524.55).
        let (_, chi2) = chi2_of(&[18, 1, 1], 380_000, 13);
        assert!(chi2 < 524.55, "chi2 = {chi2}");
        // Four groups over more than one 64-bit word, an empty group included: sizes kept.
        let values: Vec<f64> = (0..150).map(|i| i as f64).collect();
        let mut d = Dealer::new(&values, &[40, 0, 60, 50]);
        let mut rng = Gen::seed_from_u64(1);
        for _ in 0..100 {
            d.deal(&mut rng);
            assert_eq!(d.sums[1], 0.0);
            let total: f64 = d.sums.iter().sum();
            assert!((total - 11_175.0).abs() < 1e-9);
        }
    }

    #[test]
    fn the_table_and_the_bit_walk_give_the_same_sums() {
        let values: Vec<f64> = (0..300).map(|i| ((i * 37) % 101) as f64 * 0.25).collect();
        let mut d = Dealer::new(&values, &[100, 120, 80]);
        let mut walk = d.clone();
        walk.table.clear();
        let mut rng = Gen::seed_from_u64(3);
        for _ in 0..50 {
            d.deal(&mut rng);
            walk.group_mask = d.group_mask.clone();
            for g in 0..2 {
                assert!((d.mask_sum(g) - walk.mask_sum(g)).abs() < 1e-9);
            }
        }
    }
}
