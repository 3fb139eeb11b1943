//! Getting data into hyperbolic space: combinatorial tree embedding,
//! hyperbolic multidimensional scaling, learned graph embeddings.
pub mod graph;
pub mod hierarchy;
pub mod tree;
