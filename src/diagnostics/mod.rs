//! Diagnostics: how far to trust an answer, and how it moves when the data move.
//!
//! Everything here works with any [`Factorization`](crate::Factorization), whatever backend
//! produced it: the only operation used on the factors is
//! [`KktBackend::solve_in_place`](crate::backend::KktBackend::solve_in_place) (an
//! approximate `K⁻¹`), and every result that must be accurate is refined and checked on
//! the original K, the way [`Factorization::solve`](crate::Factorization::solve) is.
//!
//! * [`condition`]: 1-norm condition estimate of K (Hager 1984; Higham 1988) from a few
//!   solves, and the forward-error bound it implies.
//! * [`backward`]: normwise (Rigal & Gaches 1967) and componentwise (Oettli & Prager 1964)
//!   backward errors of a KKT solve.
//! * [`sensitivity`]: `∂f*/∂b = −y`, `∂f*/∂c = x`; forward (Jacobian-vector) derivatives
//!   of `(x, y)` for any direction `(δH, δc, δA, δb)`; full Jacobians with respect to `b`
//!   and `c`; the adjoint (reverse mode, Amos & Kolter 2017) with one extra solve.
//! * [`rank`]: rank and consistency of the constraints (column-pivoted QR of `Aᵀ`): which
//!   rows depend on which, whether `b` agrees, and the orthogonal bases the null-space
//!   method is built on. Every backend's singular path goes through it.
//! * [`inspect`]: the analysis behind `tangency inspect` (sizes, symmetry, constraint rank,
//!   inertia, condition, predicted verdict) without solving for `x`.
//!
//! Sign convention, as everywhere in the crate: `Hx + c + Aᵀy = 0`, so raising `bᵢ` by one
//! unit changes the optimal objective by `−yᵢ` to first order.

pub mod backward;
pub mod condition;
pub mod inspect;
pub mod rank;
pub mod sensitivity;
