//! Deterministic, cost-balanced slices of a plan for `kiln run --part i/N`.
//!
//! Users see "parts", counted from 1 (`--part 1/4` is the first of four, `4/4` the last), in
//! `run --part`, `status --parts` and `slurm --parts` alike; inside the code a part is a
//! [`Shard`] with a 0-based index.
//!
//! The unit of work is a group: all ε levels of one (instance, algorithm), which share the
//! reference run, so a shard never needs a reference computed by another. Groups are dealt
//! largest first to the shard with the least estimated cost so far (ties: lowest index), with
//! ties between groups broken by key — the longest-processing-time rule (Graham 1969). The
//! result depends only on the plan: every task of a job array computes the same split.

use super::Spec;
use super::plan::{Cell, Plan};
use crate::cell::Key;
use std::collections::BTreeMap;

/// One part of an N-way split, stored 0-based (`index` = i − 1 for the user's `i/N`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Shard {
    pub index: u32,
    pub count: u32,
}

impl Shard {
    /// Parses the user's `i/N`, 1 ≤ i ≤ N (the first of four is `1/4`, the last `4/4`; a
    /// Slurm array `--array=1-N` hands `$SLURM_ARRAY_TASK_ID` over as it is).
    pub fn parse(s: &str) -> Result<Shard, String> {
        let (a, b) = s.split_once('/').ok_or_else(|| {
            format!("`{s}` is not a part: write i/N, e.g. 1/4 for the first of four")
        })?;
        let index: u32 = a
            .trim()
            .parse()
            .map_err(|_| format!("`{a}` is not a part number (a whole number from 1 to N)"))?;
        let count: u32 = b
            .trim()
            .parse()
            .map_err(|_| format!("`{b}` is not a number of parts (a whole number ≥ 1)"))?;
        if count == 0 || index == 0 || index > count {
            return Err(format!(
                "part {index}/{count}: parts are counted from 1, so i must be in 1..={count} (and N ≥ 1)"
            ));
        }
        let index = index - 1;
        Ok(Shard { index, count })
    }

    /// The user's `i/N` (1-based).
    pub fn label(&self) -> String {
        format!("{}/{}", self.index + 1, self.count)
    }
}

/// How groups were dealt: each base key's shard (0-based) and each shard's estimated cost.
pub struct Assignment {
    pub shard_of: BTreeMap<Key, u32>,
    pub load: Vec<f64>,
}

/// Deals the plan's groups to `count` shards.
pub fn assign(spec: &Spec, plan: &Plan, count: u32) -> Assignment {
    // Group cost: the sum over its distinct cells.
    let mut groups: BTreeMap<Key, f64> = BTreeMap::new();
    for c in plan.distinct() {
        *groups.entry(c.base).or_default() += spec.cell_cost(c);
    }
    let mut order: Vec<(Key, f64)> = groups.into_iter().collect();
    order.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    let mut load = vec![0.0f64; count as usize];
    let mut out = BTreeMap::new();
    for (k, c) in order {
        let (best, _) = load
            .iter()
            .enumerate()
            .min_by(|a, b| a.1.total_cmp(b.1).then(a.0.cmp(&b.0)))
            .expect("count ≥ 1");
        load[best] += c;
        out.insert(k, best as u32);
    }
    Assignment {
        shard_of: out,
        load,
    }
}

/// The cells of one shard, in plan order.
pub fn cells_of(spec: &Spec, plan: &Plan, shard: Shard) -> Vec<Cell> {
    let a = assign(spec, plan, shard.count).shard_of;
    plan.cells
        .iter()
        .filter(|c| a[&c.base] == shard.index)
        .cloned()
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spec::{parse, plan::expand};

    const S: &str = r#"
[experiment]
name = "s"
[model]
family = "sk"
[sweep]
sizes = [32, 64, 512, 1024]
seeds = 7
epsilons = [0.1, 0.2]
[[algorithm]]
kind = "descent"
[[algorithm]]
kind = "anneal"
sweeps = 50
"#;

    #[test]
    fn shards_partition_the_plan() {
        let spec = parse(S, "t").unwrap();
        let plan = expand(&spec);
        for n in [1u32, 2, 3, 4, 7, 100] {
            let mut all: Vec<Key> = Vec::new();
            for i in 0..n {
                all.extend(
                    cells_of(&spec, &plan, Shard { index: i, count: n })
                        .iter()
                        .map(|c| c.key),
                );
            }
            let mut want: Vec<Key> = plan.cells.iter().map(|c| c.key).collect();
            want.sort();
            all.sort();
            assert_eq!(all, want, "{n} shards: not a partition");
        }
    }

    #[test]
    fn shards_are_balanced_by_cost() {
        let spec = parse(S, "t").unwrap();
        let plan = expand(&spec);
        let n = 4;
        let cost = |cells: &[Cell]| -> f64 { cells.iter().map(|c| spec.cell_cost(c)).sum() };
        let loads: Vec<f64> = (0..n)
            .map(|i| cost(&cells_of(&spec, &plan, Shard { index: i, count: n })))
            .collect();
        // A group is an instance's cell and its two ε cells.
        let biggest_group = 3.0
            * plan
                .distinct()
                .map(|c| spec.cell_cost(c))
                .fold(0.0, f64::max);
        let (lo, hi) = loads
            .iter()
            .fold((f64::MAX, 0.0f64), |(l, h), &x| (l.min(x), h.max(x)));
        // LPT keeps the spread below one group's cost.
        assert!(hi - lo <= biggest_group, "{loads:?}");
        // By count the shards differ: the large cells are spread, not the number of cells.
        let counts: Vec<usize> = (0..n)
            .map(|i| cells_of(&spec, &plan, Shard { index: i, count: n }).len())
            .collect();
        assert!(counts.iter().max() != counts.iter().min(), "{counts:?}");
    }

    #[test]
    fn parse_parts_counted_from_one() {
        assert_eq!(Shard::parse("1/4"), Ok(Shard { index: 0, count: 4 }));
        assert_eq!(Shard::parse("4/4"), Ok(Shard { index: 3, count: 4 }));
        assert_eq!(Shard::parse("4/4").unwrap().label(), "4/4");
        assert!(Shard::parse("0/4").is_err());
        assert!(Shard::parse("5/4").is_err());
        assert!(Shard::parse("1/0").is_err());
        assert!(Shard::parse("x").is_err());
    }
}
