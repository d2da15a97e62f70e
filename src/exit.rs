//! Exit statuses, shared by the command line and the window's command-line entry.

/// The lots differ and `--fail-on-shift` was given.
pub const EXIT_SHIFT: u8 = 1;
/// A signed summary does not verify.
pub const EXIT_NOT_VERIFIED: u8 = 1;
/// Bad input or an analysis that cannot be made.
pub const EXIT_BAD_INPUT: u8 = 2;
/// A signed summary whose signatures are valid but that is short of verified: no
/// trusted-signers list, a signer not in it or under another name or role, or lot files not
/// given (the shortfalls are listed in words).
pub const EXIT_PARTIALLY_VERIFIED: u8 = 3;
