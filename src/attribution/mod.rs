//! Attribution: the kind of each family, its rank, and what to do about it.

pub mod kind;
pub mod plan;
pub mod rank;
pub mod remedies;
pub mod sizing;
