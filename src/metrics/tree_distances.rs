//! Exact hop counts between nodes of a tree: `depth[u] + depth[v] - 2
//! depth[lca(u, v)]`, with the lowest common ancestors of `crate::tree`.
//!
//! All pairs: row `u` needs no LCA query per entry. Its ancestors `a_0 = u,
//! a_1, ..., root` split the depth-first preorder into nested subtree
//! ranges; every node in the range of `a_i` but not of `a_{i-1}` has `a_i`
//! as its LCA with `u`. Filling those ranges costs O(n) per row, and rows
//! are independent (rayon over rows; the result does not depend on the
//! thread count).

use rayon::prelude::*;

use crate::error::{value_err, Result};
use crate::tree::Tree;

/// Hop counts of the `(p, 2)` pairs (row-major `pairs`), in parallel.
pub fn pair_hops(tree: &Tree, pairs: &[[i64; 2]]) -> Result<Vec<i32>> {
    let n = tree.n as i64;
    for (r, &[a, b]) in pairs.iter().enumerate() {
        for v in [a, b] {
            if v < 0 || v >= n {
                return value_err(format!("pairs: row {r} names node {v}, out of range 0..{}", n - 1));
            }
        }
    }
    let anc = tree.ancestry();
    let mut out = vec![0i32; pairs.len()];
    out.par_chunks_mut(4096).zip(pairs.par_chunks(4096)).for_each(|(o, p)| {
        for (o, &[a, b]) in o.iter_mut().zip(p) {
            *o = anc.hops(tree, a as usize, b as usize) as i32;
        }
    });
    Ok(out)
}

/// The `(n, n)` table of hop counts, row-major, in parallel over rows.
pub fn all_hops(tree: &Tree) -> Result<Vec<i32>> {
    let n = tree.n;
    if n.checked_mul(n).map_or(true, |m| m > isize::MAX as usize / 4) {
        return value_err(format!("an ({n}, {n}) table of hop counts does not fit in memory; pass pairs="));
    }
    let anc = tree.ancestry();
    let mut out = vec![0i32; n * n];
    out.par_chunks_mut(n).enumerate().for_each_init(
        || vec![0u32; n],
        |lca_depth, (u, row)| {
            // lca_depth[pos] = depth of the LCA of u and pre[pos]
            let mut a = u;
            let (mut lo, mut hi) = (anc.tin[u] as usize, anc.tin[u] as usize);
            loop {
                let (alo, ahi) = (anc.tin[a] as usize, anc.tout[a] as usize);
                let da = tree.depth[a];
                lca_depth[alo..lo].fill(da);
                lca_depth[hi..ahi].fill(da);
                lo = alo;
                hi = ahi;
                if a == tree.root {
                    break;
                }
                a = tree.parent[a] as usize;
            }
            let du = tree.depth[u];
            for (v, o) in row.iter_mut().enumerate() {
                *o = (du + tree.depth[v] - 2 * lca_depth[anc.tin[v] as usize]) as i32;
            }
        },
    );
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn all_pairs_agree_with_pair_queries() {
        // common practice: the two algorithms share only the depths
        let mut parent = vec![-1i64];
        let mut s = 99u64;
        for i in 1..300i64 {
            s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            parent.push((s >> 33) as i64 % i);
        }
        let t = Tree::from_parents(&parent).unwrap();
        let all = all_hops(&t).unwrap();
        let n = t.n;
        let pairs: Vec<[i64; 2]> = (0..n).flat_map(|u| (0..n).map(move |v| [u as i64, v as i64])).collect();
        assert_eq!(pair_hops(&t, &pairs).unwrap(), all);
        assert!(pair_hops(&t, &[[0, 300]]).unwrap_err().to_string().contains("row 0 names node 300"));
    }
}
