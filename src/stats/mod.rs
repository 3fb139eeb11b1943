//! Statistics of point sets: centroids (Fréchet mean, Einstein midpoint),
//! dispersion, and clustering.

pub mod centroids;
pub mod kmeans;
pub mod partial;
