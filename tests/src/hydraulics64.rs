//! f64 reference (being written)
