//! benchmark (being written)
fn main() {}
