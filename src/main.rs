//! The `dyad` command line: parses arguments and wires the crates together.
fn main() {
    println!("dyad: not yet wired");
}
