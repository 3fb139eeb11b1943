use proptest::prelude::*;
#[test]
fn placeholder() { let _ = gyrokit::Curvature::new(-1.0).unwrap(); let _ = any::<u8>(); }
