//! The cost model behind [`Method::Auto`](crate::Method::Auto), kept under its old path:
//! it now lives in [`crate::pipeline::choose`], the one place that chooses methods and
//! fallbacks. Prefer that path in new code.

pub use crate::pipeline::choose::{
    check_memory, choose, choose_by_shape, choose_without_schur, dense_bytes, estimate, make_backend, CostEstimate,
    RATE_CHOLESKY, RATE_GEMM, RATE_LBLT, RATE_PIVOTED_QR,
};
