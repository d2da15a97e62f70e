//! Exit statuses, shared by the command line and the window's command-line entry.

/// The lots differ and `--fail-on-shift` was given.
pub const EXIT_SHIFT: u8 = 1;
/// A signed summary does not verify.
pub const EXIT_NOT_VERIFIED: u8 = 1;
/// Bad input or an analysis that cannot be made.
pub const EXIT_BAD_INPUT: u8 = 2;
