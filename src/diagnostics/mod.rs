//! Diagnostics that explain a KKT system beyond its solution.
//!
//! * [`rank`]: rank and consistency of the constraints (column-pivoted QR of `Aᵀ`): which
//!   rows depend on which, whether `b` agrees, and the orthogonal bases the null-space
//!   method is built on. Every backend's singular path goes through it.

pub mod rank;
