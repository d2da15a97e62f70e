//! `verify` (signature, lot files, every number) and `report` (HTML from a record).

#[allow(unused_imports)]
use super::*;

use crate::report::trust;

pub(super) fn verify(a: VerifyArgs) -> CliResult {
    let text =
        std::fs::read_to_string(&a.file).map_err(|e| format!("{}: {e}", a.file.display()))?;
    let expected = a
        .key
        .iter()
        .map(|k| sign::read_verifying_key(k))
        .collect::<Result<Vec<_>, _>>()?;
    // A list that cannot be read is bad input (exit 2), found before anything is judged.
    let trusted = match &a.trusted {
        Some(path) => Some(trust::read_trusted(path)?),
        None => None,
    };
    let fail = |why: String| -> CliResult {
        outln!("NOT VERIFIED: {why}");
        eprintln!("lotshift: {}: not verified: {why}", a.file.display());
        Ok(ExitCode::from(EXIT_NOT_VERIFIED))
    };
    let summary = match sign::verify_sequence(&text) {
        Ok(s) => s,
        Err(e) => return fail(e.to_string()),
    };
    for exp in &expected {
        if let Err(e) = sign::signed_with(&summary, exp) {
            return fail(e.to_string());
        }
    }
    // What keeps the summary from being verified without being wrong: each in words.
    let mut short: Vec<String> = Vec::new();
    let n = summary.signatures.len();
    if summary.schema == sign::SIGNED_SCHEMA_V1 {
        outln!("summary      schema {} (one signature)", summary.schema);
    } else {
        outln!(
            "summary      schema {}: {}",
            summary.schema,
            if n == 1 {
                "1 signature, covering the record".to_string()
            } else {
                format!(
                    "{n} signatures in sequence, each covering the record and every earlier signature"
                )
            }
        );
    }
    for (k, sig) in summary.signatures.iter().enumerate() {
        let comment = match sig.comment.as_deref().map(str::trim) {
            Some(c) if !c.is_empty() => format!(", comment \"{c}\""),
            _ => String::new(),
        };
        outln!(
            "signature {}  valid: signed by {} on {} (UTC), meaning {}, key {}{comment}",
            k + 1,
            sig.signer,
            sig.signed_at,
            sig.meaning,
            sig.key_fingerprint
        );
    }
    for note in sign::order_notes(&summary.signatures) {
        outln!("note         {note}");
    }
    if !expected.is_empty() {
        outln!(
            "signer key   the expected public key{} made a signature",
            if expected.len() == 1 { "" } else { "s each" }
        );
    }
    match &trusted {
        None => short.push(
            "no trusted-signers list was given (--trusted FILE): who signed is not established"
                .into(),
        ),
        Some(list) => {
            let path = a
                .trusted
                .as_ref()
                .map(|p| p.display().to_string())
                .unwrap_or_default();
            outln!(
                "trusted list {path} ({} signers, SHA-256 {})",
                list.list.signers.len(),
                list.sha256
            );
            for (k, sig) in summary.signatures.iter().enumerate() {
                let at = format!("signature {} ({} by {})", k + 1, sig.meaning, sig.signer);
                match super::signing::standing_words(&list.list, sig, &at, &path) {
                    Ok(line) => outln!("signer       {line}"),
                    Err(why) => short.push(why),
                }
            }
        }
    }
    // The protocol the comparison ran under: its signatures, as the record holds them, are
    // checked again against its recorded SHA-256, and their signers against the list.
    let recorded_protocol = match summary.record.get("protocol").filter(|v| !v.is_null()) {
        None => None,
        Some(v) => match serde_json::from_value::<report::ProtocolRecord>(v.clone()) {
            Ok(p) => Some(p),
            Err(e) => return fail(format!("the record's protocol cannot be read: {e}")),
        },
    };
    if let Some(p) = &recorded_protocol {
        if let Err(e) = crate::report::protocol_sign::check(&p.sha256, &p.signatures) {
            return fail(format!("a signature of the protocol {}: {e}", p.file));
        }
        let path = a
            .trusted
            .as_ref()
            .map(|p| p.display().to_string())
            .unwrap_or_default();
        let (lines, protocol_short) = super::signing::protocol_signature_lines(
            p,
            trusted.as_ref().map(|l| (&l.list, path.as_str())),
        );
        for line in lines {
            outln!("{line}");
        }
        short.extend(protocol_short);
    }
    if let Some(path) = &a.protocol {
        let Some(recorded) = &recorded_protocol else {
            return fail(format!(
                "--protocol {} was given, but the comparison was not run under a protocol",
                path.display()
            ));
        };
        let bytes = std::fs::read(path).map_err(|e| format!("{}: {e}", path.display()))?;
        let got = crate::data::hex(&<sha2::Sha256 as sha2::Digest>::digest(&bytes));
        if got != recorded.sha256 {
            return fail(format!(
                "protocol file {} is not the protocol run: its SHA-256 is {got}, the record has {}",
                path.display(),
                recorded.sha256
            ));
        }
        outln!("protocol     {} matches (SHA-256 {got})", path.display());
        // The signatures file beside it may have grown since the run: the record's
        // signatures must be its first ones.
        let beside = crate::report::protocol_sign::signatures_path(path);
        if beside.exists() {
            let now = match crate::report::protocol_sign::read(&beside, &got) {
                Ok(s) => s.signatures,
                Err(e) => return fail(format!("the protocol's signatures do not hold: {e}")),
            };
            if !now.starts_with(&recorded.signatures) {
                return fail(format!(
                    "the protocol's signatures in {} are not the ones the record holds",
                    beside.display()
                ));
            }
            if now.len() > recorded.signatures.len() {
                outln!(
                    "note         {} holds {} protocol signatures; the record holds the {} there \
                     were when the comparison ran (later ones were added after it)",
                    beside.display(),
                    now.len(),
                    recorded.signatures.len()
                );
            }
        }
    }
    let partial = |short: &[String]| -> CliResult {
        outln!(
            "PARTIALLY VERIFIED: every signature is valid, but the summary is short of verified in {} way{}:",
            short.len(),
            if short.len() == 1 { "" } else { "s" }
        );
        for s in short {
            outln!("  - {s}");
        }
        eprintln!(
            "lotshift: {}: only partially verified (exit status {EXIT_PARTIALLY_VERIFIED}): {}",
            a.file.display(),
            short.join("; ")
        );
        Ok(ExitCode::from(EXIT_PARTIALLY_VERIFIED))
    };
    if let Some(path) = &a.trail {
        let chain = match crate::report::trail::read_chain(path) {
            Ok(c) => c,
            Err(e) => return fail(format!("the audit trail does not hold: {e}")),
        };
        let runs = summary
            .record
            .get("audit_trail")
            .filter(|v| !v.is_null())
            .map(|v| serde_json::from_value::<report::AuditRecord>(v.clone()));
        let audit = match runs {
            None => {
                return fail(format!(
                    "--trail {} was given, but the record holds no audit trail (it was not made \
                     in the window)",
                    path.display()
                ));
            }
            Some(Err(e)) => return fail(format!("the record's audit_trail cannot be read: {e}")),
            Some(Ok(a)) => a,
        };
        for r in &audit.runs {
            match chain.iter().find(|e| e.seq == r.seq) {
                Some(e) if e.hash == r.hash && e.headline == r.headline && e.at == r.at => {}
                Some(_) => {
                    return fail(format!(
                        "the record's run {} is not the trail's entry {} (it was changed in one \
                         of them)",
                        r.seq, r.seq
                    ));
                }
                None => {
                    return fail(format!(
                        "the record's run {} is not in the audit trail {}",
                        r.seq,
                        path.display()
                    ));
                }
            }
        }
        if !chain.iter().any(|e| e.hash == audit.final_hash) {
            return fail(format!(
                "the record's last run ({}) is not in the audit trail {}",
                audit.final_hash,
                path.display()
            ));
        }
        outln!(
            "audit trail  {}: {} entries, chain intact; the record's {} runs on these lots are in it",
            path.display(),
            chain.len(),
            audit.runs.len()
        );
    }
    if a.database {
        return match verify_database(&summary.record)? {
            Ok(()) if short.is_empty() => {
                outln!("VERIFIED");
                Ok(ExitCode::SUCCESS)
            }
            Ok(()) => partial(&short),
            Err(why) => fail(why),
        };
    }
    if a.files.is_empty() {
        outln!("lot files    not checked (give --files to check them and recompute every number)");
        short.push(
            "the lot files were not given (--files): their SHA-256 were not checked and no \
             number was recomputed"
                .into(),
        );
        return partial(&short);
    }
    let rec = &summary.record;
    // The record, typed: a record that does not parse is reported, never read with defaults.
    let typed: Record = match serde_json::from_value(rec.clone()) {
        Ok(r) => r,
        Err(e) => return fail(format!("the signed record is not a comparison record: {e}")),
    };
    let [lot0, lot1] = match typed.lots.as_slice() {
        [a, b] => [a, b],
        _ => return fail("the record does not describe two lots".into()),
    };
    let split = match (&lot0.split, &lot1.split) {
        (Some((column, v0)), Some((_, v1))) => Some((column.clone(), [v0.clone(), v1.clone()])),
        _ => None,
    };
    let files: Vec<PathBuf> = match (a.files.len(), &split) {
        (1, Some(_)) => vec![a.files[0].clone()],
        (2, Some(_)) if std::fs::read(&a.files[0]).ok() == std::fs::read(&a.files[1]).ok() => {
            vec![a.files[0].clone()]
        }
        (2, _) => a.files.clone(),
        _ => {
            return fail(
                "give the two lot files (or the one file both lots were read from)".into(),
            );
        }
    };
    for (f, lot) in files.iter().zip([lot0, lot1]) {
        let bytes = std::fs::read(f).map_err(|e| format!("{}: {e}", f.display()))?;
        let got = crate::data::hex(&<sha2::Sha256 as sha2::Digest>::digest(&bytes));
        let want = lot.sha256.as_deref().unwrap_or_default();
        if got != want {
            return fail(format!(
                "lot file {} is not the file analysed: its SHA-256 is {got}, the record has {want}",
                f.display()
            ));
        }
        outln!("lot file     {} matches (SHA-256 {got})", f.display());
    }
    let options = LoadOptions {
        sheet: lot0.sheet.clone(),
        labels: lot0.forced_labels.clone(),
    };
    let lots = match &split {
        Some((column, values)) => data::load_two(
            &files,
            Some(column),
            Some([values[0].as_str(), values[1].as_str()]),
            &options,
        ),
        None => data::load_two(&files, None, None, &options),
    }?;
    if let Some(p) = &typed.protocol {
        for d in &p.deviations {
            outln!("deviation    {} — reason: {}", d.describe(), d.reason);
        }
    }
    let characteristics = typed.characteristics.clone();
    let settings = Settings::from(&typed.settings);
    let recorded_spec = typed
        .specification
        .as_ref()
        .map(crate::analysis::decision::Specification::from);
    let spec = match (&a.spec, recorded_spec) {
        (None, recorded) => SpecRequest {
            recorded,
            ..SpecRequest::default()
        },
        (Some(_), None) => {
            return fail(
                "--spec was given, but the record was made without a specification".into(),
            );
        }
        (Some(path), Some(recorded)) => {
            let file = data::spec::load_spec(path, &LoadOptions::default())?;
            let want = recorded.sha256.clone().unwrap_or_default();
            if file.sha256 != want {
                return fail(format!(
                    "specification file {} is not the file used: its SHA-256 is {}, the record \
                     has {}",
                    path.display(),
                    file.sha256,
                    if want.is_empty() {
                        "none (margins from a rule only)"
                    } else {
                        &want
                    }
                ));
            }
            outln!(
                "spec file    {} matches (SHA-256 {})",
                path.display(),
                file.sha256
            );
            SpecRequest {
                file: Some(file),
                rule: recorded.rule,
                distance_margin: recorded.distance_margin,
                recorded: None,
            }
        }
    };
    // The same selection: the compared characteristics in their order, and the columns the
    // user excluded (so each left-out column keeps its recorded reason).
    let exclude = typed
        .unmatched
        .iter()
        .filter(|u| u.lot == 0 && u.why == "excluded")
        .map(|u| u.column.clone())
        .collect();
    let request = Request {
        selection: Selection {
            only: Some(characteristics),
            exclude,
        },
        settings,
        spec,
        strict_columns: false,
        exclusions: typed.exclusions.iter().map(Into::into).collect(),
    };
    let mut lots = lots;
    let (prepared, c) = pipeline::run_owned(&mut lots, &request, &Silent)?;
    // A record of the earlier schema wrote every difference as reference − candidate: it is
    // recomputed the same way round, never reinterpreted.
    let v1 = typed.schema == report::SCHEMA_V1;
    let c = if v1 { c.reference_minus_candidate() } else { c };
    let mut again = Record::new(&c, Some((&prepared, [&lots[0], &lots[1]])));
    if v1 {
        again.schema = report::SCHEMA_V1.into();
    }
    // What was entered about the comparison and the protocol it ran under are not
    // recomputed: the signature covers them (and --protocol checks the protocol file).
    again.fields = typed.fields.clone();
    again.protocol = typed.protocol.clone();
    again.audit_trail = typed.audit_trail.clone();
    let recomputed = serde_json::to_value(again).map_err(|e| CliError::from(e.to_string()))?;
    if let Some(diff) = sign::first_difference(rec, &recomputed) {
        return fail(format!("a recomputed number differs: {diff}"));
    }
    if v1 {
        outln!(
            "schema       {} (differences written reference − candidate, as that release did)",
            report::SCHEMA_V1
        );
    }
    outln!("recomputed   every number in the record matches the lot files");
    if !short.is_empty() {
        return partial(&short);
    }
    outln!("VERIFIED");
    Ok(ExitCode::SUCCESS)
}

pub(super) fn report_html(a: ReportArgs) -> CliResult {
    use serde::Deserialize as _;
    let text =
        std::fs::read_to_string(&a.file).map_err(|e| format!("{}: {e}", a.file.display()))?;
    let doc: serde_json::Value =
        serde_json::from_str(&text).map_err(|e| format!("{}: not JSON: {e}", a.file.display()))?;
    // Typed: a file that does not parse as a record is refused with the reason, never drawn
    // with the missing parts left out.
    let html = if (doc.get("signature").is_some() || doc.get("signatures").is_some())
        && doc.get("record").is_some()
    {
        let record = Record::deserialize(&doc["record"]).map_err(|e| {
            format!(
                "{}: the signed summary does not hold a comparison record lotshift can read: {e}",
                a.file.display()
            )
        })?;
        let blocks = match doc.get("signatures") {
            Some(list) => Vec::<sign::SignatureBlock>::deserialize(list),
            None => sign::SignatureBlock::deserialize(&doc["signature"]).map(|b| vec![b]),
        }
        .map_err(|e| {
            format!(
                "{}: the signed summary's signature blocks cannot be read: {e}",
                a.file.display()
            )
        })?;
        match sign::verify_sequence(&text) {
            Ok(_) => eprintln!(
                "lotshift: the signatures verify (use lotshift verify --trusted to check who signed and the lot files)"
            ),
            Err(e) => eprintln!("lotshift: warning: {e}"),
        }
        html::render_html_signed(&record, &blocks)
    } else if matches!(
        doc.get("schema").and_then(|s| s.as_str()),
        Some(report::SCHEMA | report::SCHEMA_V1)
    ) {
        let record = Record::deserialize(&doc).map_err(|e| {
            format!(
                "{}: not a comparison record lotshift can read: {e}",
                a.file.display()
            )
        })?;
        html::render_html(&record, None)
    } else {
        return Err(CliError::from(format!(
            "{}: neither a comparison record nor a signed summary",
            a.file.display()
        )));
    };
    report::write_atomic(&a.out, html.as_bytes())
        .map_err(|e| format!("the report was not written: {e}"))?;
    outln!("report written to {}", a.out.display());
    Ok(ExitCode::SUCCESS)
}

/// `verify --database`: the recorded query is run again on the recorded database; row by row
/// (the rows' SHA-256, then every number) or inside the database (every number). `Ok(Err)` is
/// a failed check, in words.
fn verify_database(rec: &serde_json::Value) -> Result<Result<(), String>, CliError> {
    let typed: Record = match serde_json::from_value(rec.clone()) {
        Ok(r) => r,
        Err(e) => {
            return Ok(Err(format!(
                "the signed record is not a comparison record: {e}"
            )));
        }
    };
    let [lot0, lot1] = match typed.lots.as_slice() {
        [a, b] => [a, b],
        _ => return Ok(Err("the record does not describe two lots".into())),
    };
    let (Some(s0), Some(s1)) = (&lot0.source, &lot1.source) else {
        return Ok(Err(
            "the lots were not read from a database: give the lot files with --files".into(),
        ));
    };
    if s0.url != s1.url || s0.query != s1.query || s0.lot_column != s1.lot_column {
        return Ok(Err("the two lots name different sources".into()));
    }
    let source = crate::source::QuerySource {
        database: crate::source::Database::parse(&s0.url)?,
        query: s0.query.clone(),
        lot_column: s0.lot_column.clone(),
        lot_values: Some([s0.lot_value.clone(), s1.lot_value.clone()]),
    };
    outln!("database     {} (query run again, read-only)", s0.url);
    let settings = Settings::from(&typed.settings);
    let spec = SpecRequest {
        recorded: typed
            .specification
            .as_ref()
            .map(crate::analysis::decision::Specification::from),
        ..SpecRequest::default()
    };
    let options = LoadOptions {
        sheet: None,
        labels: lot0.forced_labels.clone(),
    };
    let mut again = if s0.in_database {
        let choice = crate::source::aggregate::Choice {
            only: Some(typed.characteristics.clone()),
            exclude: Vec::new(),
        };
        let outcome = crate::source::aggregate::compare_in_database(
            &source, None, &options, &choice, &settings,
        )?;
        let mut c = outcome.comparison;
        if !spec.is_empty() {
            let given = spec.specification(&c.characteristics, &c.units)?;
            analysis::apply_specification(&mut c, &given, None)?;
        }
        crate::source::aggregate::record(&c, &outcome.lots, &source)
    } else {
        let mut lots = crate::source::load_lots(&source, None, &options)?;
        for (lot, recorded) in lots.iter().zip([s0, s1]) {
            let want = recorded.rows_sha256.as_deref().unwrap_or_default();
            if lot.provenance.sha256 != want {
                return Ok(Err(format!(
                    "the rows of lot \"{}\" are not the rows analysed: their SHA-256 is {}, the \
                     record has {want}",
                    recorded.lot_value, lot.provenance.sha256
                )));
            }
            outln!(
                "rows         lot \"{}\": {} rows match (SHA-256 {})",
                recorded.lot_value,
                lot.provenance.rows_read,
                lot.provenance.sha256
            );
        }
        let request = Request {
            selection: Selection {
                only: Some(typed.characteristics.clone()),
                exclude: Vec::new(),
            },
            settings,
            spec,
            strict_columns: false,
            exclusions: typed.exclusions.iter().map(Into::into).collect(),
        };
        let (prepared, c) = pipeline::run_owned(&mut lots, &request, &Silent)?;
        Record::new(&c, Some((&prepared, [&lots[0], &lots[1]])))
    };
    again.fields = typed.fields.clone();
    again.protocol = typed.protocol.clone();
    again.audit_trail = typed.audit_trail.clone();
    let recomputed = serde_json::to_value(again).map_err(|e| CliError::from(e.to_string()))?;
    if let Some(diff) = sign::first_difference(rec, &recomputed) {
        return Ok(Err(format!("a recomputed number differs: {diff}")));
    }
    outln!("recomputed   every number in the record matches the database");
    Ok(Ok(()))
}
