//! The `kinglet` command-line tool.
fn main() {
    println!("kinglet");
}
