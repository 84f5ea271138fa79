//! Builds the site app's WebAssembly (`wasm/`: the server's own reduction library for the
//! browser) so that `cargo build` of a clean clone embeds it; see DEVELOPERS.md.
//!
//! A nested `cargo build --target wasm32-unknown-unknown --release` of `wasm/`, with its
//! own target directory under OUT_DIR so it never waits on the outer build's lock. When
//! the target is missing and rustup is there, it is added first.

use std::path::{Path, PathBuf};
use std::process::Command;

const TARGET: &str = "wasm32-unknown-unknown";

fn main() {
    let root = PathBuf::from(std::env::var("CARGO_MANIFEST_DIR").expect("CARGO_MANIFEST_DIR"));
    let out = PathBuf::from(std::env::var("OUT_DIR").expect("OUT_DIR"));
    for p in [
        "src/reduction",
        "src/present.rs",
        "src/site_form.rs",
        "src/readings.rs",
        "wasm/src",
        "wasm/Cargo.toml",
        "wasm/Cargo.lock",
    ] {
        println!("cargo:rerun-if-changed={}", root.join(p).display());
    }
    let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".into());
    ensure_target();
    let target_dir = out.join("site-wasm");
    let status = Command::new(&cargo)
        .args(["build", "--release", "--target", TARGET, "--manifest-path"])
        .arg(root.join("wasm/Cargo.toml"))
        .env("CARGO_TARGET_DIR", &target_dir)
        // The outer build's settings are for the host binary, not for this target.
        .env_remove("CARGO_ENCODED_RUSTFLAGS")
        .env_remove("RUSTFLAGS")
        .env_remove("CARGO_BUILD_TARGET")
        .env_remove("CARGO_MAKEFLAGS")
        .env_remove("RUSTC_WORKSPACE_WRAPPER")
        .status()
        .expect("running cargo for the site WebAssembly");
    assert!(
        status.success(),
        "building wasm/ for {TARGET} failed (see above)"
    );
    let built = target_dir.join(TARGET).join("release/liftledger_site.wasm");
    std::fs::copy(&built, out.join("liftledger_site.wasm")).expect("copying the site WebAssembly");
}

/// Adds the wasm target through rustup when this toolchain lacks it.
fn ensure_target() {
    if has_target() {
        return;
    }
    let added = Command::new("rustup")
        .args(["target", "add", TARGET])
        .status()
        .is_ok_and(|s| s.success());
    assert!(
        added && has_target(),
        "the Rust target {TARGET} is missing: run `rustup target add {TARGET}`"
    );
}

/// Whether the active toolchain's sysroot has the wasm target's standard library.
fn has_target() -> bool {
    let rustc = std::env::var("RUSTC").unwrap_or_else(|_| "rustc".into());
    Command::new(rustc)
        .args(["--print", "sysroot"])
        .output()
        .ok()
        .map(|o| String::from_utf8_lossy(&o.stdout).trim().to_string())
        .is_some_and(|s| Path::new(&s).join("lib/rustlib").join(TARGET).exists())
}
