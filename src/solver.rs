//! Old path of the pipeline, kept so existing code compiles: everything here is
//! [`crate::pipeline`] under its former name. Deprecated in favour of `tangency::pipeline`
//! (or the crate root for `solve`, `Options`, `Method`, `Plan`, `Factorization`,
//! `Workspace`); not marked `#[deprecated]` yet so that callers building with
//! `-D warnings` keep building for one release.

pub use crate::pipeline::*;
