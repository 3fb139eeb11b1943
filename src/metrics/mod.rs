//! Judging an embedding: distortion, graph reconstruction (mean average
//! precision, mean rank), exact tree distances.
pub mod distortion;
pub mod reconstruction;
