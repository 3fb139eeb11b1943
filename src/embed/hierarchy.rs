//! A combinatorial embedding of a hierarchy with multiple inheritance (a
//! directed acyclic graph given by `(child, parent)` rows, such as the
//! transitive closure of a taxonomy): the starting points of a learned
//! embedding that already put every node near its parents.
//!
//! The rows are read as a DAG; each node's *level* is the length of its
//! longest path to a root. Its *tree parent* is the parent of highest level
//! (ties: the lowest id), so the tree depth of every node is its level and
//! all its parents lie at smaller depths. A parent of highest level is a
//! direct one, so the closure of a hierarchy and its direct rows give the
//! same embedding. The tree (under a virtual root at the
//! origin when there are several roots) is embedded as by
//! [`super::tree::embed`]; a node with two or more *direct* parents (its
//! parents not reachable upwards from another of its parents: the
//! transitive reduction) goes one edge beyond the Fréchet mean of their
//! points instead ([`super::tree::embed_joined`]).

use crate::error::{value_err, Result};
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::tree::Tree;

use super::tree::{embed_joined, Embedded, Joins};

/// The DAG of a hierarchy reduced to what the embedding needs.
#[derive(Debug)]
pub struct Hierarchy {
    /// Nodes of the hierarchy (a virtual root, if any, is node `n`).
    pub n: usize,
    /// The tree parent of every node (length `n`, or `n + 1` with the
    /// virtual root as last entry), -1 for the root.
    pub tree_parent: Vec<i64>,
    /// Direct parents of node `v` (its parents not reachable upwards from
    /// another of its parents): `direct[direct_start[v]..direct_start[v + 1]]`.
    pub direct_start: Vec<u32>,
    pub direct: Vec<u32>,
    /// Longest path from `v` to a root.
    pub level: Vec<u32>,
}

/// Reads `(child, parent)` rows on nodes `0..n` (duplicates allowed). A row
/// out of range, a self-loop or a cycle is a `ValueError` naming the row or a
/// node on the cycle.
pub fn read(n: usize, rows: &[[i64; 2]]) -> Result<Hierarchy> {
    if n == 0 {
        return value_err("the hierarchy has no nodes (n_nodes = 0)");
    }
    if n >= u32::MAX as usize {
        return value_err(format!("the hierarchy has {n} nodes; at most {} are supported", u32::MAX - 1));
    }
    for (i, &[c, p]) in rows.iter().enumerate() {
        for v in [c, p] {
            if v < 0 || v >= n as i64 {
                return value_err(format!(
                    "edges: row {i} ({c}, {p}) names node {v}, out of range: nodes are 0..{}",
                    n - 1
                ));
            }
        }
        if c == p {
            return value_err(format!("edges: row {i} ({c}, {p}) is a self-loop: a node is not its own parent"));
        }
    }
    let mut r: Vec<(u32, u32)> = rows.iter().map(|&[c, p]| (c as u32, p as u32)).collect();
    r.sort_unstable();
    r.dedup();
    // parents of each node (CSR, ascending ids) and children (for Kahn's order)
    let mut pstart = vec![0u32; n + 1];
    let mut cstart = vec![0u32; n + 1];
    for &(c, p) in &r {
        pstart[c as usize + 1] += 1;
        cstart[p as usize + 1] += 1;
    }
    for v in 0..n {
        pstart[v + 1] += pstart[v];
        cstart[v + 1] += cstart[v];
    }
    let parents: Vec<u32> = r.iter().map(|&(_, p)| p).collect();
    let mut children = vec![0u32; r.len()];
    let mut fill = cstart.clone();
    for &(c, p) in &r {
        children[fill[p as usize] as usize] = c;
        fill[p as usize] += 1;
    }
    let np = |v: usize| (pstart[v + 1] - pstart[v]) as usize;
    let par = |v: usize| &parents[pstart[v] as usize..pstart[v + 1] as usize];
    // Kahn: parents before children; levels along the way
    let mut waiting: Vec<u32> = (0..n).map(|v| np(v) as u32).collect();
    let mut order: Vec<u32> = (0..n as u32).filter(|&v| waiting[v as usize] == 0).collect();
    let mut level = vec![0u32; n];
    let mut head = 0;
    while head < order.len() {
        let p = order[head] as usize;
        head += 1;
        for &c in &children[cstart[p] as usize..cstart[p + 1] as usize] {
            let c = c as usize;
            level[c] = level[c].max(level[p] + 1);
            waiting[c] -= 1;
            if waiting[c] == 0 {
                order.push(c as u32);
            }
        }
    }
    if order.len() < n {
        // every unordered node has an unordered parent: walking up from one
        // of them must come back to a node already seen
        let mut v = (0..n).find(|&v| waiting[v] > 0).expect("an unordered node");
        let mut seen = vec![false; n];
        while !seen[v] {
            seen[v] = true;
            v = *par(v).iter().find(|&&p| waiting[p as usize] > 0).expect("an unordered parent") as usize;
        }
        return value_err(format!(
            "edges: the (child, parent) rows form a cycle through node {v}; a hierarchy has none"
        ));
    }
    // tree parent: highest level, then lowest id (a parent of highest level
    // is a direct one, so the closure and the direct rows agree)
    let mut tree_parent = vec![-1i64; n];
    for v in 0..n {
        let best = par(v).iter().copied().max_by_key(|&p| (level[p as usize], std::cmp::Reverse(p)));
        if let Some(p) = best {
            tree_parent[v] = p as i64;
        }
    }
    let roots = tree_parent.iter().filter(|&&p| p < 0).count();
    if roots > 1 {
        tree_parent.iter_mut().for_each(|p| {
            if *p < 0 {
                *p = n as i64
            }
        });
        tree_parent.push(-1);
    }
    // direct parents: those not reachable upwards from another parent
    // (the transitive reduction; a search above the parents of each node of
    // several, marking with the node's stamp)
    let mut mark = vec![u32::MAX; n];
    let mut stack: Vec<u32> = Vec::new();
    let mut direct_start = vec![0u32; n + 1];
    let mut direct = Vec::new();
    for v in 0..n {
        let ps = par(v);
        if ps.len() > 1 {
            let stamp = v as u32;
            for &p in ps {
                stack.extend(par(p as usize).iter().copied().filter(|&a| mark[a as usize] != stamp));
                while let Some(a) = stack.pop() {
                    if mark[a as usize] != stamp {
                        mark[a as usize] = stamp;
                        stack.extend(par(a as usize).iter().copied().filter(|&b| mark[b as usize] != stamp));
                    }
                }
            }
        }
        direct.extend(ps.iter().copied().filter(|&p| mark[p as usize] != v as u32));
        direct_start[v + 1] = direct.len() as u32;
    }
    Ok(Hierarchy { n, tree_parent, direct_start, direct, level })
}

/// Embeds the hierarchy in dimension `dim` (see the module notes); `scale`
/// as in [`super::tree::embed`], for the tree of the hierarchy (virtual root
/// included). Returns the `n` nodes' points (the virtual root dropped).
pub fn embed(h: &Hierarchy, dim: usize, scale: Option<f64>, model: Model, k: Curvature) -> Result<Embedded> {
    let tree = Tree::from_parents(&h.tree_parent)?;
    let m = h.tree_parent.len();
    let mut start = h.direct_start.clone();
    start.resize(m + 1, *start.last().expect("n + 1 offsets"));
    let joins = Joins { start, parents: h.direct.clone() };
    let mut e = embed_joined(&tree, dim, scale, model, k, Some(&joins))?;
    e.points.truncate(h.n * e.width);
    Ok(e)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::poincare;
    use crate::numeric::gap;

    fn closure(parent: &[i64]) -> Vec<[i64; 2]> {
        let mut rows = Vec::new();
        for v in 0..parent.len() {
            let mut a = parent[v];
            while a >= 0 {
                rows.push([v as i64, a]);
                a = parent[a as usize];
            }
        }
        rows
    }

    fn dist(x: &[f64], y: &[f64]) -> f64 {
        let one = Curvature::default();
        let mut o = vec![0.0; x.len()];
        poincare::sub(&one, x, y, &mut o);
        2.0 * crate::numeric::sumsq(&o).sqrt().atanh()
    }

    #[test]
    fn a_closure_of_a_tree_embeds_as_the_tree() {
        // on a tree's closure every node has one direct parent: the same
        // points as the tree embedding, bit for bit
        let parent = [-1, 0, 0, 1, 1, 2, 5, 5];
        let h = read(parent.len(), &closure(&parent)).unwrap();
        assert_eq!(h.tree_parent, parent.to_vec());
        let a = embed(&h, 3, Some(1.0), Model::Poincare, Curvature::default()).unwrap();
        let t = Tree::from_parents(&parent).unwrap();
        let b = super::super::tree::embed(&t, 3, Some(1.0), Model::Poincare, Curvature::default()).unwrap();
        assert_eq!(a.points, b.points);
    }

    #[test]
    fn levels_tree_parents_and_direct_parents_of_a_closure() {
        // 0 root; 1, 2 below 0; 3 below 1; 4 below 3 and 2 (closure rows)
        // (common practice: the transitive reduction of a closure)
        let rows = [[1, 0], [2, 0], [3, 1], [3, 0], [4, 3], [4, 1], [4, 0], [4, 2]];
        let h = read(5, &rows).unwrap();
        assert_eq!(h.level, vec![0, 1, 1, 2, 3]);
        assert_eq!(h.tree_parent, vec![-1, 0, 0, 1, 3]);
        let d = |v: usize| h.direct[h.direct_start[v] as usize..h.direct_start[v + 1] as usize].to_vec();
        assert_eq!(d(4), vec![2, 3]);
        assert_eq!(d(3), vec![1]);
        assert_eq!(d(0), Vec::<u32>::new());
    }

    #[test]
    fn a_node_of_two_parents_sits_one_edge_beyond_their_mean() {
        // root 0 with children 1, 2, 3; node 4 below 1 and 2; 5 below 4
        let rows = [[1, 0], [2, 0], [3, 0], [4, 1], [4, 2], [4, 0], [5, 4], [5, 1], [5, 2], [5, 0]];
        let h = read(6, &rows).unwrap();
        assert_eq!(h.tree_parent, vec![-1, 0, 0, 0, 1, 4]);
        let s = 1.5;
        let one = Curvature::default();
        let e = embed(&h, 2, Some(s), Model::Poincare, one).unwrap();
        assert_eq!(e.points.len(), 12);
        let p = |v: usize| &e.points[2 * v..2 * v + 2];
        let r = |x: &[f64]| 2.0 * crate::numeric::sumsq(x).sqrt().atanh();
        // the Fréchet mean of nodes 1 and 2 is their geodesic midpoint
        // (common practice: the mean of two points halves their geodesic)
        let mut m = [0.0; 2];
        poincare::midpoint(&one, p(1), p(2), &mut m);
        assert!((dist(p(4), &m) - s).abs() < 1e-13, "{}", dist(p(4), &m));
        // beyond the mean, and farther out than it
        assert!(r(p(4)) > r(&m) + 0.5 * s, "{} {}", r(p(4)), r(&m));
        assert!(dist(p(4), p(1)) > 0.1 && dist(p(4), p(2)) > 0.1);
        // its child one edge beyond it, farther from the root
        assert!((dist(p(5), p(4)) - s).abs() < 1e-13);
        assert!(r(p(5)) > r(p(4)));
        assert!(gap(1.0, p(5)) > 0.0);
    }

    #[test]
    fn direct_rows_with_a_shortcut_read_as_the_closure() {
        // the hierarchy of the test above as direct rows plus a shortcut
        // (4 -> 0, which 4 -> 3 -> 1 -> 0 implies): the same tree parents and
        // direct parents as from the closure
        let closure = read(5, &[[1, 0], [2, 0], [3, 1], [3, 0], [4, 3], [4, 1], [4, 0], [4, 2]]).unwrap();
        let direct = read(5, &[[1, 0], [2, 0], [3, 1], [4, 3], [4, 2], [4, 0]]).unwrap();
        assert_eq!(direct.tree_parent, closure.tree_parent);
        assert_eq!(direct.direct, closure.direct);
        assert_eq!(direct.direct_start, closure.direct_start);
        assert_eq!(direct.level, closure.level);
    }

    #[test]
    fn bad_rows_are_named() {
        let e = read(3, &[[0, 1], [1, 1]]).unwrap_err().to_string();
        assert!(e.contains("row 1") && e.contains("self-loop"), "{e}");
        let e = read(3, &[[0, 3]]).unwrap_err().to_string();
        assert!(e.contains("row 0") && e.contains("out of range"), "{e}");
        let e = read(3, &[[0, 1], [1, 2], [2, 0]]).unwrap_err().to_string();
        assert!(e.contains("cycle"), "{e}");
        assert!(read(0, &[]).is_err());
    }
}
