//! `holdback`, the desktop tool. (being written)

fn main() {
    println!("holdback: desktop tool (being written)");
}
