//! lotshift: decide whether two production lots differ on several characteristics at once,
//! and why (two-sample Hotelling T² with follow-up intervals and the discriminant direction).
//!
//! The engine ([`stats`], [`analysis`]) is pure; [`data`] reads lot files; [`report`] writes
//! the comparison record; [`cli`] and [`gui`] are thin shells around them.

pub mod analysis;
pub mod cli;
pub mod data;
pub mod exit;
pub mod format;
#[cfg(feature = "gui")]
pub mod gui;
pub mod palette;
pub mod pipeline;
pub mod protocol;
pub mod report;
pub mod stats;
