//! The walk over elimination-tree ancestor chains that replaces a priority
//! queue in every hierarchy search.
//!
//! On a CCH the upward search space of a node is exactly its ancestors in
//! the elimination tree (each node's parent is its lowest upper neighbour).
//! A search from several start nodes visits the union of their chains, and
//! walking that union in increasing rank settles every node after all of its
//! lower neighbours on the chains. [`Chains`] is that walk: one cursor per
//! start, each at the lowest not yet visited node of its chain. Used by the
//! point query ([`super::query`]) and by the many-to-many walks
//! ([`super::matrix`]).

use crate::graph::NONE;

/// The union of up to `N` ancestor chains, walked in increasing rank.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Chains<const N: usize> {
    /// Per chain, the next rank to visit, or NONE once past the root.
    cur: [u32; N],
}

impl<const N: usize> Chains<N> {
    /// Chains starting at the given ranks (the first `N`; more are ignored).
    #[inline]
    pub(crate) fn new(starts: impl IntoIterator<Item = u32>) -> Self {
        let mut cur = [NONE; N];
        for (c, r) in cur.iter_mut().zip(starts) {
            *c = r;
        }
        Self { cur }
    }

    /// The lowest rank not yet visited on any chain, or NONE when every
    /// chain is done.
    #[inline]
    pub(crate) fn peek(&self) -> u32 {
        self.cur.iter().copied().min().unwrap_or(NONE)
    }

    /// Moves every chain standing at `x` on to `parent` (the elimination
    /// tree parent of `x`).
    #[inline]
    pub(crate) fn step(&mut self, x: u32, parent: u32) {
        for c in self.cur.iter_mut() {
            if *c == x {
                *c = parent;
            }
        }
    }

    /// The next rank of the union (`parent` is the elimination tree), or
    /// `None` when the walk is over.
    #[inline]
    pub(crate) fn next(&mut self, parent: &[u32]) -> Option<u32> {
        let x = self.peek();
        if x == NONE {
            return None;
        }
        self.step(x, parent[x as usize]);
        Some(x)
    }
}
