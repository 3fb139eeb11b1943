//! Rooted trees, read once and shared by every tree algorithm of the crate
//! (`embed::tree`, `metrics::tree_distances`): validation of the three input
//! forms (parent array, `(parent, child)` edge rows, undirected edges with a
//! root), and the structure the algorithms walk: children in CSR form,
//! depth, breadth-first order by level, depth-first preorder with subtree
//! ranges, and skew-binary jump pointers for lowest common ancestors in
//! O(log n) with O(n) memory (Myers 1983, "An applicative random-access
//! stack"; the same jumps serve any tree).
//!
//! A message about a bad input always names the node (or edge row) at fault.

use crate::error::{value_err, Result};

/// Sentinel parent of the root.
pub const NONE: u32 = u32::MAX;

/// A validated rooted tree on nodes `0..n`.
#[derive(Clone, Debug)]
pub struct Tree {
    pub n: usize,
    pub root: usize,
    /// `parent[v]`, [`NONE`] for the root.
    pub parent: Vec<u32>,
    /// Children of `v`: `children[child_start[v]..child_start[v + 1]]`, in
    /// increasing node order.
    pub child_start: Vec<u32>,
    pub children: Vec<u32>,
    pub depth: Vec<u32>,
    /// Breadth-first order (root first); level `l` is
    /// `bfs[level_start[l]..level_start[l + 1]]`, and the children of each
    /// node are contiguous in it, in CSR order.
    pub bfs: Vec<u32>,
    pub level_start: Vec<u32>,
    /// In breadth-first positions: the position of the parent of the node
    /// at position `q`, and the positions of its children,
    /// `bfs_child[q]..bfs_child[q + 1]` (so that a pass in breadth-first
    /// order reads everything it needs in order, not by node number).
    pub bfs_parent: Vec<u32>,
    pub bfs_child: Vec<u32>,
}

/// What LCA queries need (built on demand: the embedding does not):
/// depth-first preorder with subtree ranges, and skew-binary jump pointers.
#[derive(Clone, Debug)]
pub struct Ancestry {
    /// Depth-first preorder: `pre[tin[v]] = v`, and the subtree of `v` is
    /// `pre[tin[v]..tout[v]]`.
    pub pre: Vec<u32>,
    pub tin: Vec<u32>,
    pub tout: Vec<u32>,
    /// Skew-binary jump pointers (Myers): an ancestor of `v` (the root jumps to itself).
    pub jump: Vec<u32>,
}

/// Largest number of nodes (indices are stored as u32).
const MAX_NODES: usize = (u32::MAX - 1) as usize;

fn check_size(n: usize) -> Result<()> {
    if n == 0 {
        return value_err("the tree is empty: it needs at least one node (the root)");
    }
    if n > MAX_NODES {
        return value_err(format!("the tree has {n} nodes; at most {MAX_NODES} are supported"));
    }
    Ok(())
}

impl Tree {
    /// From a parent array: `parent[v]` the parent of node `v`, -1 for the
    /// single root.
    pub fn from_parents(parent: &[i64]) -> Result<Tree> {
        let n = parent.len();
        check_size(n)?;
        let mut par = vec![NONE; n];
        let mut root = None;
        for (v, &p) in parent.iter().enumerate() {
            if p == -1 {
                if let Some(r) = root {
                    return value_err(format!(
                        "parent: nodes {r} and {v} both have parent -1; a tree has a single root"
                    ));
                }
                root = Some(v);
            } else if p < 0 || p >= n as i64 {
                return value_err(format!(
                    "parent: node {v} has parent {p}, out of range: a parent is a node 0..{} or -1 for the root",
                    n - 1
                ));
            } else if p as usize == v {
                return value_err(format!("parent: node {v} is its own parent (a cycle)"));
            } else {
                par[v] = p as u32;
            }
        }
        let Some(root) = root else {
            return value_err(format!(
                "parent: no node has parent -1, so the parent links form a cycle (through node {}); a tree has one root",
                on_cycle(&par, 0)
            ));
        };
        Tree::build(par, root, "parent")
    }

    /// From `(parent, child)` rows on nodes `0..n` (`n - 1` rows for a
    /// tree); the root is the node that is never a child.
    pub fn from_edges(n: usize, edges: &[[i64; 2]]) -> Result<Tree> {
        check_size(n)?;
        let mut par = vec![NONE; n];
        let mut row_of = vec![u32::MAX; n];
        for (r, &[p, c]) in edges.iter().enumerate() {
            for v in [p, c] {
                if v < 0 || v >= n as i64 {
                    return value_err(format!(
                        "edges: row {r} names node {v}, out of range: the edges of a tree on {n} nodes name nodes 0..{}",
                        n - 1
                    ));
                }
            }
            let (p, c) = (p as usize, c as usize);
            if p == c {
                return value_err(format!("edges: row {r} joins node {c} to itself (a cycle)"));
            }
            if par[c] != NONE {
                return value_err(format!(
                    "edges: node {c} has two parents, {} (row {}) and {p} (row {r})",
                    par[c], row_of[c]
                ));
            }
            par[c] = p as u32;
            row_of[c] = r as u32;
        }
        let mut roots = par.iter().enumerate().filter(|(_, &p)| p == NONE).map(|(v, _)| v);
        let Some(root) = roots.next() else {
            return value_err(format!(
                "edges: every node is a child, so the edges form a cycle (through node {}); a tree has one root",
                on_cycle(&par, 0)
            ));
        };
        if let Some(other) = roots.next() {
            return value_err(format!(
                "edges: nodes {root} and {other} are both never a child: two roots (the edges do not connect them)"
            ));
        }
        Tree::build(par, root, "edges")
    }

    /// From undirected edges `{a, b}` of a tree on nodes `0..n`, rooted at
    /// `root` (a networkx `Graph`).
    pub fn from_undirected(n: usize, edges: &[[i64; 2]], root: i64) -> Result<Tree> {
        check_size(n)?;
        if root < 0 || root >= n as i64 {
            return value_err(format!("root {root} is not a node of the graph (nodes 0..{})", n - 1));
        }
        let root = root as usize;
        for (r, &[a, b]) in edges.iter().enumerate() {
            for v in [a, b] {
                if v < 0 || v >= n as i64 {
                    return value_err(format!("edges: row {r} names node {v}, out of range 0..{}", n - 1));
                }
            }
            if a == b {
                return value_err(format!("the graph has a self-loop at node {a} (a cycle); not a tree"));
            }
        }
        // adjacency in CSR
        let mut start = vec![0u32; n + 1];
        for &[a, b] in edges {
            start[a as usize + 1] += 1;
            start[b as usize + 1] += 1;
        }
        for i in 0..n {
            start[i + 1] += start[i];
        }
        let mut fill = start.clone();
        let mut adj = vec![0u32; 2 * edges.len()];
        for &[a, b] in edges {
            adj[fill[a as usize] as usize] = b as u32;
            fill[a as usize] += 1;
            adj[fill[b as usize] as usize] = a as u32;
            fill[b as usize] += 1;
        }
        let mut par = vec![NONE; n];
        let mut seen = vec![false; n];
        let mut queue = Vec::with_capacity(n);
        queue.push(root as u32);
        seen[root] = true;
        let mut head = 0;
        while head < queue.len() {
            let u = queue[head] as usize;
            head += 1;
            let mut skipped_parent = false;
            for &w in &adj[start[u] as usize..start[u + 1] as usize] {
                let w = w as usize;
                if par[u] == w as u32 && !skipped_parent {
                    skipped_parent = true;
                    continue;
                }
                if seen[w] {
                    return value_err(format!(
                        "the graph has a cycle: the edge between nodes {u} and {w} closes it; not a tree"
                    ));
                }
                seen[w] = true;
                par[w] = u as u32;
                queue.push(w as u32);
            }
        }
        if let Some(v) = seen.iter().position(|&s| !s) {
            return value_err(format!(
                "node {v} is not connected to the root {root}: the graph is not connected, so it is not a tree"
            ));
        }
        Tree::build(par, root, "graph")
    }

    /// Builds the structure from parent links with one root; a node that the
    /// root does not reach lies on (or hangs from) a cycle.
    fn build(par: Vec<u32>, root: usize, arg: &str) -> Result<Tree> {
        let n = par.len();
        // children in CSR, in increasing node order (counting sort)
        let mut child_start = vec![0u32; n + 1];
        for &p in &par {
            if p != NONE {
                child_start[p as usize + 1] += 1;
            }
        }
        for i in 0..n {
            child_start[i + 1] += child_start[i];
        }
        let mut fill = child_start.clone();
        let mut children = vec![0u32; n.saturating_sub(1)];
        for (v, &p) in par.iter().enumerate() {
            if p != NONE {
                children[fill[p as usize] as usize] = v as u32;
                fill[p as usize] += 1;
            }
        }
        // breadth-first order, by level
        let mut depth = vec![0u32; n];
        let mut bfs = Vec::with_capacity(n);
        let mut bfs_parent = Vec::with_capacity(n);
        let mut bfs_child = Vec::with_capacity(n + 1);
        let mut level_start = vec![0u32];
        bfs.push(root as u32);
        bfs_parent.push(NONE);
        let mut lo = 0;
        while lo < bfs.len() {
            let hi = bfs.len();
            level_start.push(hi as u32);
            for i in lo..hi {
                let u = bfs[i] as usize;
                bfs_child.push(bfs.len() as u32);
                for &c in &children[child_start[u] as usize..child_start[u + 1] as usize] {
                    depth[c as usize] = depth[u] + 1;
                    bfs.push(c);
                    bfs_parent.push(i as u32);
                }
            }
            lo = hi;
        }
        bfs_child.push(bfs.len() as u32);
        if bfs.len() < n {
            let mut reached = vec![false; n];
            for &v in &bfs {
                reached[v as usize] = true;
            }
            let start = reached.iter().position(|&r| !r).expect("an unreached node");
            let c = on_cycle(&par, start);
            return value_err(format!(
                "{arg}: node {c} lies on a cycle of parent links (node {start} does not lead to the root {root}); not a tree"
            ));
        }
        Ok(Tree { n, root, parent: par, child_start, children, depth, bfs, level_start, bfs_parent, bfs_child })
    }

    /// Number of children of `v`.
    #[inline(always)]
    pub fn degree(&self, v: usize) -> usize {
        (self.child_start[v + 1] - self.child_start[v]) as usize
    }

    /// The largest depth.
    pub fn height(&self) -> usize {
        self.level_start.len().saturating_sub(2)
    }

    /// The preorder ranges and jump pointers of this tree.
    pub fn ancestry(&self) -> Ancestry {
        let (n, root) = (self.n, self.root);
        let (child_start, children, par, depth, bfs) =
            (&self.child_start, &self.children, &self.parent, &self.depth, &self.bfs);
        // depth-first preorder and subtree ranges (iterative)
        let mut pre = Vec::with_capacity(n);
        let mut tin = vec![0u32; n];
        let mut tout = vec![0u32; n];
        let mut stack: Vec<(u32, u32)> = vec![(root as u32, child_start[root])];
        tin[root] = 0;
        pre.push(root as u32);
        while let Some(top) = stack.last_mut() {
            let u = top.0 as usize;
            if top.1 < child_start[u + 1] {
                let c = children[top.1 as usize];
                top.1 += 1;
                tin[c as usize] = pre.len() as u32;
                pre.push(c);
                stack.push((c, child_start[c as usize]));
            } else {
                tout[u] = pre.len() as u32;
                stack.pop();
            }
        }
        // skew-binary jump pointers, parents before children
        let mut jump = vec![0u32; n];
        jump[root] = root as u32;
        for &v in &bfs[1..] {
            let v = v as usize;
            let p = par[v] as usize;
            let jp = jump[p] as usize;
            let jjp = jump[jp] as usize;
            jump[v] = if p != root && depth[p] - depth[jp] == depth[jp] - depth[jjp] { jjp as u32 } else { p as u32 };
        }
        Ancestry { pre, tin, tout, jump }
    }
}

impl Ancestry {
    /// Whether `a` is an ancestor of `v` (or `v` itself).
    #[inline(always)]
    pub fn is_ancestor(&self, a: usize, v: usize) -> bool {
        self.tin[a] <= self.tin[v] && self.tin[v] < self.tout[a]
    }

    /// The lowest common ancestor of `u` and `v`, O(log n).
    #[inline(always)]
    pub fn lca(&self, t: &Tree, u: usize, v: usize) -> usize {
        if self.is_ancestor(u, v) {
            return u;
        }
        if self.is_ancestor(v, u) {
            return v;
        }
        // climb from u to the deepest ancestor that is not an ancestor of v;
        // its parent is the answer
        let mut a = u;
        while !self.is_ancestor(t.parent[a] as usize, v) {
            let j = self.jump[a] as usize;
            a = if self.is_ancestor(j, v) { t.parent[a] as usize } else { j };
        }
        t.parent[a] as usize
    }

    /// Hop count between `u` and `v`.
    #[inline(always)]
    pub fn hops(&self, t: &Tree, u: usize, v: usize) -> u32 {
        let a = self.lca(t, u, v);
        t.depth[u] + t.depth[v] - 2 * t.depth[a]
    }
}

/// A node on the cycle reached by following parent links from `start`
/// (which does not reach a root).
fn on_cycle(par: &[u32], start: usize) -> usize {
    // Floyd's tortoise and hare along parent links; every node on the walk has a parent.
    let step = |v: usize| par[v] as usize;
    let (mut slow, mut fast) = (step(start), step(step(start)));
    while slow != fast {
        slow = step(slow);
        fast = step(step(fast));
    }
    // report the smallest node on the cycle, so the message is stable
    let mut best = slow;
    let mut v = step(slow);
    while v != slow {
        best = best.min(v);
        v = step(v);
    }
    best
}

#[cfg(test)]
mod tests {
    use super::*;

    fn err(r: Result<Tree>) -> String {
        r.unwrap_err().to_string()
    }

    #[test]
    fn structure_of_a_small_tree() {
        //        0
        //      / | \
        //     1  2  3
        //    / \     \
        //   4   5     6
        let t = Tree::from_parents(&[-1, 0, 0, 0, 1, 1, 3]).unwrap();
        assert_eq!(t.root, 0);
        assert_eq!(t.depth, vec![0, 1, 1, 1, 2, 2, 2]);
        assert_eq!(t.bfs, vec![0, 1, 2, 3, 4, 5, 6]);
        assert_eq!(t.level_start, vec![0, 1, 4, 7]);
        assert_eq!(t.bfs_parent, vec![NONE, 0, 0, 0, 1, 1, 3]);
        assert_eq!(t.bfs_child, vec![1, 4, 6, 6, 7, 7, 7, 7]);
        let a = t.ancestry();
        assert_eq!(a.pre, vec![0, 1, 4, 5, 2, 3, 6]);
        assert_eq!(t.height(), 2);
        assert_eq!(a.lca(&t, 4, 5), 1);
        assert_eq!(a.lca(&t, 4, 6), 0);
        assert_eq!(a.lca(&t, 6, 3), 3);
        assert_eq!(a.hops(&t, 4, 6), 4);
        assert_eq!(a.hops(&t, 5, 5), 0);
    }

    #[test]
    fn lca_on_a_long_path_and_a_caterpillar_matches_walking_up() {
        // common practice: compare with the naive walk to the common ancestor
        let n = 3000;
        let mut parent: Vec<i64> = (0..n as i64).map(|i| i - 1).collect();
        // hang leaves off every third path node
        for i in (0..n as i64).step_by(3) {
            parent.push(i);
        }
        let t = Tree::from_parents(&parent).unwrap();
        let anc = t.ancestry();
        let naive = |mut u: usize, mut v: usize| {
            let mut h = 0;
            while t.depth[u] > t.depth[v] {
                u = t.parent[u] as usize;
                h += 1;
            }
            while t.depth[v] > t.depth[u] {
                v = t.parent[v] as usize;
                h += 1;
            }
            while u != v {
                u = t.parent[u] as usize;
                v = t.parent[v] as usize;
                h += 2;
            }
            h
        };
        let m = parent.len();
        let mut s = 12345u64;
        for _ in 0..20000 {
            s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            let u = (s >> 33) as usize % m;
            s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            let v = (s >> 33) as usize % m;
            assert_eq!(anc.hops(&t, u, v), naive(u, v), "{u} {v}");
        }
    }

    #[test]
    fn bad_trees_name_the_node() {
        assert!(err(Tree::from_parents(&[])).contains("empty"));
        assert!(err(Tree::from_parents(&[-1, 0, -1])).contains("nodes 0 and 2"));
        assert!(err(Tree::from_parents(&[-1, 5])).contains("node 1 has parent 5"));
        assert!(err(Tree::from_parents(&[-1, 1])).contains("node 1 is its own parent"));
        // 1 -> 2 -> 3 -> 1 is a cycle cut off from the root 0
        let e = err(Tree::from_parents(&[-1, 3, 1, 2]));
        assert!(e.contains("node 1 lies on a cycle"), "{e}");
        let e = err(Tree::from_parents(&[1, 2, 0]));
        assert!(e.contains("no node has parent -1") && e.contains("node 0"), "{e}");
        let e = err(Tree::from_edges(3, &[[0, 1], [2, 1]]));
        assert!(e.contains("node 1 has two parents, 0 (row 0) and 2 (row 1)"), "{e}");
        let e = err(Tree::from_edges(3, &[[0, 1], [1, 7]]));
        assert!(e.contains("row 1 names node 7"), "{e}");
        let e = err(Tree::from_edges(3, &[[1, 2], [2, 1]]));
        assert!(e.contains("two parents") || e.contains("cycle"), "{e}");
        let e = err(Tree::from_undirected(4, &[[0, 1], [1, 2], [2, 0]], 0));
        assert!(e.contains("cycle"), "{e}");
        let e = err(Tree::from_undirected(4, &[[0, 1], [2, 3]], 0));
        assert!(e.contains("node 2 is not connected"), "{e}");
        let t = Tree::from_undirected(3, &[[2, 1], [0, 1]], 2).unwrap();
        assert_eq!(t.parent, vec![1, 2, NONE]);
        let e = err(Tree::from_edges(4, &[[0, 1], [2, 3]]));
        assert!(e.contains("nodes 0 and 2 are both never a child"), "{e}");
        let t = Tree::from_edges(1, &[]).unwrap();
        assert_eq!((t.n, t.root), (1, 0));
    }
}
