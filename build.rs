//! Build script. Without the `mpi` feature it does nothing. With it, it generates Rust
//! bindings for MUMPS's double-precision C interface (`dmumps_c.h`: the `DMUMPS_STRUC_C`
//! structure and `dmumps_c`) with bindgen, and links `libdmumps` and `libmumps_common`.
//!
//! Where the header and libraries are: `MUMPS_INCLUDE_DIR` and `MUMPS_LIB_DIR` when set,
//! otherwise the compiler's default paths (Debian's `libmumps-dev` puts them in
//! `/usr/include` and `/usr/lib/<triple>`).

fn main() {
    println!("cargo:rerun-if-changed=build.rs");
    // Cargo sets CARGO_FEATURE_MPI exactly when it compiles this script with the feature.
    #[cfg(feature = "mpi")]
    if std::env::var_os("CARGO_FEATURE_MPI").is_some() {
        mumps::generate();
    }
}

#[cfg(feature = "mpi")]
mod mumps {
    use std::path::PathBuf;

    pub fn generate() {
        println!("cargo:rerun-if-env-changed=MUMPS_INCLUDE_DIR");
        println!("cargo:rerun-if-env-changed=MUMPS_LIB_DIR");
        if let Some(dir) = std::env::var_os("MUMPS_LIB_DIR") {
            println!("cargo:rustc-link-search=native={}", PathBuf::from(dir).display());
        }
        println!("cargo:rustc-link-lib=dmumps");
        println!("cargo:rustc-link-lib=mumps_common");
        let mut builder = bindgen::Builder::default()
            .header_contents("tangency_mumps.h", "#include <dmumps_c.h>\n")
            .allowlist_function("dmumps_c")
            .allowlist_type("DMUMPS_STRUC_C")
            .layout_tests(true)
            .derive_default(false);
        if let Some(dir) = std::env::var_os("MUMPS_INCLUDE_DIR") {
            builder = builder.clang_arg(format!("-I{}", PathBuf::from(dir).display()));
        }
        let bindings = match builder.generate() {
            Ok(b) => b,
            Err(e) => panic!(
                "the `mpi` feature needs MUMPS's C header dmumps_c.h (Debian: libmumps-dev) and \
                 libclang (libclang-dev); set MUMPS_INCLUDE_DIR if it is elsewhere: {e}"
            ),
        };
        let out = PathBuf::from(std::env::var_os("OUT_DIR").expect("cargo sets OUT_DIR"));
        bindings
            .write_to_file(out.join("dmumps_bindings.rs"))
            .expect("write the MUMPS bindings into OUT_DIR");
    }
}
