//! Rebuild when a migration is added or edited: `sqlx::migrate!()` embeds them at compile time
//! and does not track the directory on its own.
fn main() {
    println!("cargo:rerun-if-changed=migrations");
}
