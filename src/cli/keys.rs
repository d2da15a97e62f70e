//! `keygen`: an Ed25519 key pair for signed summaries.

#[allow(unused_imports)]
use super::*;

pub(super) fn keygen(a: KeygenArgs) -> CliResult {
    if a.signer.trim().is_empty() {
        return Err("--signer needs the printed name of the key's owner".into());
    }
    let private = sign::keygen(&a.out, &a.name, a.signer.trim())?;
    let (public, signer) = sign::key_companions(&private);
    outln!(
        "private key  {} (keep it to yourself; mode 0600)",
        private.display()
    );
    outln!(
        "public key   {} (give it to reviewers: lotshift verify --key)",
        public.display()
    );
    outln!("signer       {} ({})", a.signer.trim(), signer.display());
    Ok(ExitCode::SUCCESS)
}
