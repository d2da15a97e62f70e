//! `sign` (a further signature on a signed summary, or a signature on a comparison
//! protocol), `trust` (an entry of the
//! trusted-signers list) and the passphrase of a private key (asked for on the terminal
//! without echo, or read from a file or standard input; never stored).

#[allow(unused_imports)]
use super::*;

use std::io::BufRead as _;
use std::path::Path;

use crate::report::trust;

/// The first line of `file` ("-": standard input), without its line ending.
fn passphrase_from(file: &Path) -> Result<String, CliError> {
    let mut line = String::new();
    let read = if file == Path::new("-") {
        std::io::stdin().lock().read_line(&mut line)
    } else {
        std::fs::File::open(file).and_then(|f| std::io::BufReader::new(f).read_line(&mut line))
    };
    let shown = if file == Path::new("-") {
        "standard input".to_string()
    } else {
        file.display().to_string()
    };
    match read {
        Err(e) => Err(format!("{shown}: the passphrase cannot be read: {e}").into()),
        Ok(0) => Err(format!("{shown}: no passphrase (the first line is empty)").into()),
        Ok(_) => {
            let pass = line.trim_end_matches(['\n', '\r']).to_string();
            if pass.is_empty() {
                return Err(format!("{shown}: no passphrase (the first line is empty)").into());
            }
            Ok(pass)
        }
    }
}

/// Asks on the terminal, without echo.
fn ask(prompt: &str) -> Result<String, CliError> {
    rpassword::prompt_password(prompt).map_err(|e| {
        CliError::from(format!(
            "the passphrase cannot be asked for on a terminal ({e}): give --passphrase-file \
             FILE, or --passphrase-file - to read it from standard input"
        ))
    })
}

/// The passphrase for a new key: from `file`, or asked twice on the terminal.
pub(super) fn new_passphrase(file: Option<&Path>) -> Result<String, CliError> {
    match file {
        Some(f) => passphrase_from(f),
        None => {
            let first = ask(&format!(
                "passphrase for the new key (at least {} characters): ",
                sign::MIN_PASSPHRASE
            ))?;
            let again = ask("the same passphrase again: ")?;
            if first != again {
                return Err("the two passphrases differ; no key was made".into());
            }
            Ok(first)
        }
    }
}

/// Reads a private key for signing: a protected key is opened with the passphrase (from
/// `file`, or asked on the terminal); a key made before passphrases signs with a warning.
pub(super) fn signing_key(
    path: &Path,
    file: Option<&Path>,
) -> Result<ed25519_dalek::SigningKey, CliError> {
    let key = sign::read_key_file(path)?;
    if !key.is_protected() {
        eprintln!(
            "lotshift: warning: {} is not protected by a passphrase; anyone who copies the file \
             can sign as you. Make a protected key with `lotshift keygen` and have it listed \
             instead.",
            path.display()
        );
        return Ok(key.unlock(None)?);
    }
    let pass = match file {
        Some(f) => passphrase_from(f)?,
        None => ask(&format!("passphrase for {}: ", path.display()))?,
    };
    Ok(key.unlock(Some(&pass))?)
}

/// The meaning named on the command line.
pub(super) fn meaning(text: &str) -> Result<sign::Meaning, CliError> {
    sign::Meaning::parse(text).ok_or_else(|| {
        format!("--meaning must be authorship, review or approval (got \"{text}\")").into()
    })
}

/// The printed name: given, or the one keygen stored beside the key.
pub(super) fn signer_name(given: Option<&str>, key: &Path) -> Result<String, CliError> {
    match given.map(str::trim) {
        Some(name) if !name.is_empty() => Ok(name.to_string()),
        Some(_) => Err("--signer needs the printed name of the signer".into()),
        None => sign::signer_beside(key).ok_or_else(|| {
            format!(
                "no printed name for the signer: give --signer, or keep the .signer.json file \
                 keygen wrote beside {}",
                key.display()
            )
            .into()
        }),
    }
}

pub(super) fn sign_summary(a: SignArgs) -> CliResult {
    let meaning = meaning(&a.meaning)?;
    let signer = signer_name(a.signer.as_deref(), &a.key)?;
    let text =
        std::fs::read_to_string(&a.file).map_err(|e| format!("{}: {e}", a.file.display()))?;
    let schema = serde_json::from_str::<serde_json::Value>(&text)
        .ok()
        .and_then(|v| v.get("schema").and_then(|s| s.as_str()).map(str::to_string));
    if schema.as_deref() == Some(crate::protocol::PROTOCOL_SCHEMA) {
        return sign_protocol(&a, meaning, signer);
    }
    // The signatures there are checked before the passphrase is asked for.
    if let Err(e) = sign::verify_sequence(&text) {
        return Err(sign::SignError::Refused {
            path: a.file.display().to_string(),
            why: format!("its signatures do not verify ({e})"),
        }
        .into());
    }
    let key = signing_key(&a.key, a.passphrase_file.as_deref())?;
    let m = sign::Manifestation {
        signer,
        signed_at: sign::now_rfc3339(),
        meaning,
        comment: a.comment.trim().to_string(),
    };
    let (json, summary) = sign::add_signature(&a.file, &text, &key, &m)?;
    let out_path = a.out.as_ref().unwrap_or(&a.file);
    report::write_atomic(out_path, json.as_bytes())
        .map_err(|e| format!("the signed summary was not written: {e}"))?;
    let n = summary.signatures.len();
    let last = &summary.signatures[n - 1];
    outln!(
        "signature {n} added to {}: {} by {} on {} (UTC), key {}",
        out_path.display(),
        last.meaning,
        last.signer,
        last.signed_at,
        last.key_fingerprint
    );
    for note in sign::order_notes(&summary.signatures) {
        outln!("note         {note}");
    }
    Ok(ExitCode::SUCCESS)
}

/// A signature on a comparison protocol, in the signatures file beside it (or `--out`): the
/// protocol must be usable and every signature already there must verify.
fn sign_protocol(a: &SignArgs, meaning: sign::Meaning, signer: String) -> CliResult {
    use crate::report::protocol_sign;
    let p = crate::protocol::load(&a.file)?;
    let key = signing_key(&a.key, a.passphrase_file.as_deref())?;
    let m = sign::Manifestation {
        signer,
        signed_at: sign::now_rfc3339(),
        meaning,
        comment: a.comment.trim().to_string(),
    };
    let signed = protocol_sign::add(&p.sha256, &p.signatures, &key, &m)?;
    let out_path = a
        .out
        .clone()
        .unwrap_or_else(|| protocol_sign::signatures_path(&a.file));
    let json = serde_json::to_string_pretty(&signed).map_err(|e| CliError::from(e.to_string()))?;
    report::write_atomic(&out_path, json.as_bytes())
        .map_err(|e| format!("the protocol's signatures were not written: {e}"))?;
    let n = signed.signatures.len();
    let last = &signed.signatures[n - 1];
    outln!(
        "signature {n} of the protocol {} (SHA-256 {}) written to {}: {} by {} on {} (UTC), key {}",
        a.file.display(),
        p.sha256,
        out_path.display(),
        last.meaning,
        last.signer,
        last.signed_at,
        last.key_fingerprint
    );
    for note in sign::order_notes(&signed.signatures) {
        outln!("note         {note}");
    }
    Ok(ExitCode::SUCCESS)
}

pub(super) fn trust(a: TrustArgs) -> CliResult {
    let key = sign::read_verifying_key(&a.key)?;
    let roles = a
        .role
        .iter()
        .map(|r| {
            trust::Role::parse(r).ok_or_else(|| {
                CliError::from(format!(
                    "--role takes author, reviewer or approver (got \"{r}\")"
                ))
            })
        })
        .collect::<Result<Vec<_>, _>>()?;
    let entry = trust::add_trusted(&a.trusted, &key, &a.name, &roles)?;
    outln!(
        "trusted      {} as {}, key {} (in {})",
        entry.name,
        entry
            .roles
            .iter()
            .map(|r| r.as_str())
            .collect::<Vec<_>>()
            .join(", "),
        entry.key_fingerprint,
        a.trusted.display()
    );
    Ok(ExitCode::SUCCESS)
}

/// How signature `sig` (named `at` in the output) stands against the trusted list at `path`:
/// `Ok` with the line saying it is trusted, `Err` with the shortfall in words.
pub(super) fn standing_words(
    list: &trust::TrustedList,
    sig: &sign::SignatureBlock,
    at: &str,
    path: &str,
) -> Result<String, String> {
    let role = trust::Role::for_meaning(sig.meaning).as_str();
    match list.standing(sig) {
        trust::Standing::Trusted => Ok(format!(
            "{at}: in the trusted list under that name, as {role}"
        )),
        trust::Standing::UnknownKey => Err(format!(
            "{at}: the key {} is not in the trusted list {path}",
            sig.key_fingerprint
        )),
        trust::Standing::NameDiffers { listed } => Err(format!(
            "{at}: the trusted list has this key under the printed name \"{listed}\", not \"{}\"",
            sig.signer
        )),
        trust::Standing::RoleMissing { listed } => Err(format!(
            "{at}: the trusted list does not let this signer sign as {role} (roles: {})",
            listed
                .iter()
                .map(|r| r.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        )),
    }
}

/// The protocol's signatures in words (one line each, or one saying it is not signed) and,
/// against a trusted list, each signer's standing: the lines to print and the shortfalls.
pub(super) fn protocol_signature_lines(
    p: &report::ProtocolRecord,
    trusted: Option<(&trust::TrustedList, &str)>,
) -> (Vec<String>, Vec<String>) {
    let mut lines = Vec::new();
    let mut short = Vec::new();
    if p.signatures.is_empty() {
        lines.push(format!(
            "protocol     {} is NOT SIGNED: nobody's authorship, review or approval of it is \
             recorded (sign it with `lotshift sign PROTOCOL`)",
            p.file
        ));
        return (lines, short);
    }
    for (k, sig) in p.signatures.iter().enumerate() {
        let comment = match sig.comment.as_deref().map(str::trim) {
            Some(c) if !c.is_empty() => format!(", comment \"{c}\""),
            _ => String::new(),
        };
        lines.push(format!(
            "protocol signature {}  {} by {} on {} (UTC), key {}{comment}",
            k + 1,
            sig.meaning,
            sig.signer,
            sig.signed_at,
            sig.key_fingerprint
        ));
    }
    if let Some((list, path)) = trusted {
        for (k, sig) in p.signatures.iter().enumerate() {
            let at = format!(
                "protocol signature {} ({} by {})",
                k + 1,
                sig.meaning,
                sig.signer
            );
            match standing_words(list, sig, &at, path) {
                Ok(line) => lines.push(format!("signer       {line}")),
                Err(why) => short.push(why),
            }
        }
    }
    (lines, short)
}
