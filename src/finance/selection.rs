//! Choosing zones under a capital budget: the exact 0/1 knapsack, and the greedy
//! profitability-index order it is compared with.
//!
//! Amounts are integer minor units (cents), so sums and comparisons are exact. Only items with a
//! positive value can raise the total, so the others are never chosen (the caller fixes in
//! committed zones before calling).

/// A candidate: its investment (weight) and its value, both in minor units.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Item {
    /// One-off investment, zero or more.
    pub cost: i64,
    /// Value (NPV), any sign.
    pub value: i64,
}

/// The chosen set.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Choice {
    /// Indices into the items, ascending.
    pub chosen: Vec<usize>,
    /// Sum of their costs.
    pub cost: i64,
    /// Sum of their values.
    pub value: i64,
    /// `false` when the search stopped at [`NODE_LIMIT`] before proving the set optimal (the
    /// best set found is returned, and the page says so).
    pub proven: bool,
}

/// Search nodes before branch and bound gives up proving optimality. Uncorrelated instances of
/// 1,000 items need a few thousand; the limit only guards a request against pathological input.
pub const NODE_LIMIT: u64 = 20_000_000;

struct Search<'a> {
    items: &'a [Item],
    order: Vec<usize>,
    best_value: i64,
    best: Vec<bool>,
    current: Vec<bool>,
    nodes: u64,
}

impl Search<'_> {
    /// Dantzig's bound: fill greedily by value density from position `k`, the break item
    /// fractionally.
    fn bound(&self, k: usize, room: i64, value: i64) -> f64 {
        let mut room = room as f64;
        let mut bound = value as f64;
        for &i in &self.order[k..] {
            let it = self.items[i];
            if (it.cost as f64) <= room {
                room -= it.cost as f64;
                bound += it.value as f64;
            } else {
                return bound + it.value as f64 * room / it.cost as f64;
            }
        }
        bound
    }

    fn go(&mut self, k: usize, room: i64, value: i64) {
        self.nodes += 1;
        if value > self.best_value {
            self.best_value = value;
            self.best.clone_from(&self.current);
        }
        // Integer values: a bound below best + 1 cannot improve on the best.
        if k == self.order.len() || self.nodes > NODE_LIMIT || self.bound(k, room, value) < (self.best_value + 1) as f64
        {
            return;
        }
        let i = self.order[k];
        let it = self.items[i];
        if it.cost <= room {
            self.current[i] = true;
            self.go(k + 1, room - it.cost, value + it.value);
            self.current[i] = false;
        }
        self.go(k + 1, room, value);
    }
}

/// The set of items with the largest total value whose total cost is within `budget`.
///
/// Branch and bound, depth first, items in decreasing value density (`value / cost`), pruned by
/// Dantzig's fractional bound: the textbook method of Kellerer, Pferschy and Pisinger,
/// *Knapsack Problems* (Springer, 2004), section 2.5 and chapter 5. Items with zero cost and a
/// positive value are always taken. Among sets of equal value, the first found in that order.
///
/// # Example
/// ```
/// use pilot_ledger::finance::selection::{Item, knapsack};
///
/// // Taking the densest item first (6 for 5) would leave room for nothing else.
/// let items = [Item { cost: 5, value: 6 }, Item { cost: 4, value: 4 }, Item { cost: 4, value: 4 }];
/// let c = knapsack(&items, 8);
/// assert_eq!((c.chosen, c.value, c.proven), (vec![1, 2], 8, true));
/// ```
pub fn knapsack(items: &[Item], budget: i64) -> Choice {
    let budget = budget.max(0);
    let mut order: Vec<usize> =
        (0..items.len()).filter(|&i| items[i].value > 0 && items[i].cost >= 0 && items[i].cost <= budget).collect();
    // Decreasing value / cost, compared exactly by cross-multiplication (zero cost first).
    order.sort_by(|&a, &b| {
        let (x, y) = (items[a], items[b]);
        (i128::from(y.value) * i128::from(x.cost)).cmp(&(i128::from(x.value) * i128::from(y.cost))).then(a.cmp(&b))
    });
    let mut s = Search {
        items,
        order,
        best_value: 0,
        best: vec![false; items.len()],
        current: vec![false; items.len()],
        nodes: 0,
    };
    s.go(0, budget, 0);
    let chosen: Vec<usize> = (0..items.len()).filter(|&i| s.best[i]).collect();
    Choice {
        cost: chosen.iter().map(|&i| items[i].cost).sum(),
        value: s.best_value,
        proven: s.nodes <= NODE_LIMIT,
        chosen,
    }
}

/// Take items in the given order (best profitability index first) while they fit: each item
/// that fits the remaining budget is taken, one that does not is skipped.
pub fn greedy_in_order(items: &[Item], order: &[usize], budget: i64) -> Choice {
    let mut room = budget.max(0);
    let mut chosen = Vec::new();
    for &i in order {
        let it = items[i];
        if it.value > 0 && it.cost <= room {
            room -= it.cost;
            chosen.push(i);
        }
    }
    chosen.sort_unstable();
    Choice {
        cost: chosen.iter().map(|&i| items[i].cost).sum(),
        value: chosen.iter().map(|&i| items[i].value).sum(),
        proven: true,
        chosen,
    }
}

#[cfg(test)]
mod tests {
    #![expect(clippy::unwrap_used)]
    use super::*;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    fn brute_force(items: &[Item], budget: i64) -> i64 {
        (0u32..1 << items.len())
            .filter_map(|mask| {
                let picked = items.iter().enumerate().filter(|(i, _)| mask & (1 << i) != 0);
                let (c, v) = picked.fold((0, 0), |(c, v), (_, it)| (c + it.cost, v + it.value));
                (c <= budget).then_some(v)
            })
            .max()
            .unwrap()
    }

    #[test]
    fn equals_brute_force_on_300_random_instances() {
        let mut rng = ChaCha8Rng::seed_from_u64(300);
        for case in 0..300 {
            let n = rng.random_range(1..=18);
            // Costs up to 50,000.00 and values -20,000.00 to 90,000.00, in cents.
            let items: Vec<Item> = (0..n)
                .map(|_| Item { cost: rng.random_range(0..5_000_000), value: rng.random_range(-2_000_000..9_000_000) })
                .collect();
            let total: i64 = items.iter().map(|i| i.cost).sum();
            let budget = rng.random_range(0..=total.max(1));
            let c = knapsack(&items, budget);
            assert!(c.proven);
            assert!(c.cost <= budget);
            assert_eq!(c.value, c.chosen.iter().map(|&i| items[i].value).sum::<i64>());
            assert_eq!(c.value, brute_force(&items, budget), "instance {case}: {items:?} budget {budget}");
        }
    }

    /// Exact dynamic programme over integer capacities, for the large check below.
    fn dp(items: &[Item], budget: usize) -> i64 {
        let mut best = vec![0i64; budget + 1];
        for it in items.iter().filter(|i| i.value > 0) {
            let w = it.cost as usize;
            for c in (w..=budget).rev() {
                best[c] = best[c].max(best[c - w] + it.value);
            }
        }
        best[budget]
    }

    #[test]
    fn five_hundred_candidates_are_solved_exactly() {
        let mut rng = ChaCha8Rng::seed_from_u64(500);
        for _ in 0..3 {
            let items: Vec<Item> = (0..500)
                .map(|_| {
                    let cost = rng.random_range(1..2_000);
                    Item { cost, value: cost + rng.random_range(-400..1_500) }
                })
                .collect();
            let c = knapsack(&items, 100_000);
            assert!(c.proven);
            assert_eq!(c.value, dp(&items, 100_000));
        }
    }
}
