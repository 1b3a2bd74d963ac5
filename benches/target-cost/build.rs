//! Relinks when the linker script changes (cargo does not watch it otherwise).
fn main() {
    println!("cargo:rerun-if-changed=link.x");
}
