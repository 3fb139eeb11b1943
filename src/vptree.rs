//! Exact metric-tree neighbour index (to be written).
