//! Relativistic velocities in physical units (to be written).
