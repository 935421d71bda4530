//! Worst detection time over the explored faulty graph.
//!
//! The joint search merges states, so the time at which it first meets a state is not the
//! latest time a branch can reach it: a branch that reaches an undetected state later than
//! the state's first visitor is merged into it, and its later detection would go uncounted.
//! Detection (a monitor set in the faulty vehicle) is a property of the faulty node alone, so
//! the latest first detection is a longest path in the faulty graph: from an injection,
//! through undetected nodes, to a detecting one. A cycle through undetected nodes is a
//! driving pattern that keeps the fault latent: a branch may stay on it for as long as it
//! likes, so everything downstream of it counts at the horizon.

/// What the longest undetected walks give.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Detection {
    /// The latest step (counted from the injection, capped at the horizon) at which a branch
    /// is first detected, if any branch is.
    pub worst: Option<u32>,
    /// Some branch stays undetected for the whole horizon.
    pub latent: bool,
}

/// Longest undetected walks in a graph of `n` nodes: `roots` are the injections (step 0),
/// `succ(u, out)` pushes the known successors of `u` (none for a node never expanded),
/// `undetected(u)` says whether no monitor is set in `u`; walks are counted in steps and
/// capped at `horizon`. Linear in the nodes and edges reached: a topological pass (Kahn's)
/// over the undetected nodes reachable from the roots through undetected nodes, where those
/// it cannot order lie on or after a cycle.
pub fn longest_undetected(
    n: usize,
    roots: impl IntoIterator<Item = u32>,
    mut succ: impl FnMut(u32, &mut Vec<u32>),
    undetected: impl Fn(u32) -> bool,
    horizon: u32,
) -> Detection {
    const UNSEEN: u32 = u32::MAX;
    // Per node: UNSEEN, or the count of its undetected predecessors not yet ordered.
    let mut indeg = vec![UNSEEN; n];
    let mut reached = Vec::new();
    let mut out = Vec::new();
    let mut stack: Vec<u32> = Vec::new();
    for r in roots {
        if undetected(r) && indeg[r as usize] == UNSEEN {
            indeg[r as usize] = 0;
            stack.push(r);
        }
    }
    let starts = stack.clone();
    while let Some(u) = stack.pop() {
        reached.push(u);
        out.clear();
        succ(u, &mut out);
        for &v in &out {
            if !undetected(v) {
                continue;
            }
            let d = &mut indeg[v as usize];
            if *d == UNSEEN {
                *d = 0;
                stack.push(v);
            }
            *d += 1;
        }
    }
    let mut dist = vec![0u32; n];
    let mut ordered = vec![false; n];
    let mut queue: std::collections::VecDeque<u32> = starts
        .into_iter()
        .filter(|&r| indeg[r as usize] == 0)
        .collect();
    while let Some(u) = queue.pop_front() {
        ordered[u as usize] = true;
        out.clear();
        succ(u, &mut out);
        for &v in &out {
            if !undetected(v) {
                continue;
            }
            let vi = v as usize;
            dist[vi] = dist[vi].max((dist[u as usize] + 1).min(horizon));
            indeg[vi] -= 1;
            if indeg[vi] == 0 {
                queue.push_back(v);
            }
        }
    }
    let mut res = Detection::default();
    for &u in &reached {
        let ui = u as usize;
        if !ordered[ui] {
            // On or after a cycle of undetected nodes: walks of any length reach it.
            dist[ui] = horizon;
        }
        res.latent |= dist[ui] >= horizon;
    }
    for &u in &reached {
        out.clear();
        succ(u, &mut out);
        for &v in &out {
            if !undetected(v) {
                let at = (dist[u as usize] + 1).min(horizon);
                res.worst = Some(res.worst.map_or(at, |w| w.max(at)));
            }
        }
    }
    res
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The reference: longest walks by relaxation to a fixed point (Bellman-Ford with the
    /// lengths capped, common practice, no source), written without the topological order.
    fn by_relaxation(
        adj: &[Vec<u32>],
        roots: &[u32],
        undetected: &[bool],
        horizon: u32,
    ) -> Detection {
        let n = adj.len();
        let mut dist: Vec<Option<u32>> = vec![None; n];
        for &r in roots {
            if undetected[r as usize] {
                dist[r as usize] = Some(0);
            }
        }
        loop {
            let mut changed = false;
            for u in 0..n {
                let Some(d) = dist[u] else { continue };
                for &v in &adj[u] {
                    let vi = v as usize;
                    if undetected[vi] {
                        let nd = (d + 1).min(horizon);
                        if dist[vi].is_none_or(|x| x < nd) {
                            dist[vi] = Some(nd);
                            changed = true;
                        }
                    }
                }
            }
            if !changed {
                break;
            }
        }
        let mut res = Detection::default();
        for u in 0..n {
            let Some(d) = dist[u] else { continue };
            res.latent |= d >= horizon;
            for &v in &adj[u] {
                if !undetected[v as usize] {
                    let at = (d + 1).min(horizon);
                    res.worst = Some(res.worst.map_or(at, |w| w.max(at)));
                }
            }
        }
        res
    }

    fn run(adj: &[Vec<u32>], roots: &[u32], undetected: &[bool], horizon: u32) -> Detection {
        longest_undetected(
            adj.len(),
            roots.iter().copied(),
            |u, out| out.extend(&adj[u as usize]),
            |u| undetected[u as usize],
            horizon,
        )
    }

    #[test]
    fn worked_examples() {
        // 0 -> 1 -> 2 -> 3 (detected) and 0 -> 3: the longest way to detection is 3 steps.
        let adj = vec![vec![1, 3], vec![2], vec![3], vec![]];
        let u = [true, true, true, false];
        let d = run(&adj, &[0], &u, 100);
        assert_eq!(
            d,
            Detection {
                worst: Some(3),
                latent: false
            }
        );
        // A self-loop on 1 (the driver may wait there): detection as late as the horizon,
        // and a branch that never leaves it is latent.
        let adj = vec![vec![1, 3], vec![1, 2], vec![3], vec![]];
        assert_eq!(
            run(&adj, &[0], &u, 100),
            Detection {
                worst: Some(100),
                latent: true
            }
        );
        // A chain longer than the horizon is latent without a cycle.
        let adj = vec![vec![1], vec![2], vec![3], vec![]];
        let all = [true; 4];
        assert_eq!(
            run(&adj, &[0], &all, 2),
            Detection {
                worst: None,
                latent: true
            }
        );
        // Detected at the injection: nothing undetected to walk.
        assert_eq!(
            run(&adj, &[3], &[true, true, true, false], 10),
            Detection::default()
        );
        // Edges out of a detected node do not count (detection is for good).
        let adj = vec![vec![1], vec![2], vec![3], vec![]];
        let u = [true, false, true, false];
        assert_eq!(
            run(&adj, &[0], &u, 10),
            Detection {
                worst: Some(1),
                latent: false
            }
        );
    }

    #[test]
    fn agrees_with_relaxation_on_random_graphs() {
        let mut x = 0x853c_49e6_748f_ea9bu64;
        for case in 0..400 {
            crate::testing::xorshift(&mut x);
            let n = 1 + (x % 40) as usize;
            let adj: Vec<Vec<u32>> = (0..n)
                .map(|_| {
                    crate::testing::xorshift(&mut x);
                    let k = x % 4;
                    (0..k)
                        .map(|_| {
                            crate::testing::xorshift(&mut x);
                            (x % n as u64) as u32
                        })
                        .collect()
                })
                .collect();
            let undetected: Vec<bool> = (0..n)
                .map(|_| {
                    crate::testing::xorshift(&mut x);
                    !x.is_multiple_of(5)
                })
                .collect();
            crate::testing::xorshift(&mut x);
            let roots: Vec<u32> = (0..=(x % 3) as u32).map(|r| r % n as u32).collect();
            crate::testing::xorshift(&mut x);
            let horizon = 1 + (x % 30) as u32;
            assert_eq!(
                run(&adj, &roots, &undetected, horizon),
                by_relaxation(&adj, &roots, &undetected, horizon),
                "case {case}"
            );
        }
    }
}
