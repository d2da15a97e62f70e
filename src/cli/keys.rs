//! `keygen`: an Ed25519 key pair for signed summaries, the private key encrypted under a
//! passphrase.

#[allow(unused_imports)]
use super::*;

pub(super) fn keygen(a: KeygenArgs) -> CliResult {
    if a.signer.trim().is_empty() {
        return Err("--signer needs the printed name of the key's owner".into());
    }
    // Refused before the passphrase is asked for: keygen never overwrites a key.
    let planned = a.out.join(format!("{}.pem", a.name));
    let (public, signer) = sign::key_companions(&planned);
    for p in [&planned, &public, &signer] {
        if p.exists() {
            return Err(sign::SignError::Exists(p.display().to_string()).into());
        }
    }
    let passphrase = super::signing::new_passphrase(a.passphrase_file.as_deref())?;
    let private = sign::keygen(&a.out, &a.name, a.signer.trim(), &passphrase)?;
    let (public, signer) = sign::key_companions(&private);
    outln!(
        "private key  {} (encrypted under your passphrase, which is not stored; mode 0600)",
        private.display()
    );
    outln!(
        "public key   {} (give it to the quality system for its trusted-signers list: lotshift trust)",
        public.display()
    );
    outln!("signer       {} ({})", a.signer.trim(), signer.display());
    Ok(ExitCode::SUCCESS)
}
