//! `compare` (lot files) and `compare-stats` (summary statistics).

#[allow(unused_imports)]
use super::*;

pub(super) fn compare(mut a: CompareArgs) -> CliResult {
    // The description, the protocol and the specification first: a bad one stops before the
    // lots are read.
    let mut fields = a
        .fields
        .iter()
        .map(|f| report::parse_field(f))
        .collect::<Result<Vec<_>, _>>()
        .map_err(CliError::from)?;
    let protocol = match &a.protocol {
        Some(path) => Some(crate::protocol::load(path)?),
        None => None,
    };
    let trusted = match &a.trusted {
        Some(path) => Some(crate::report::trust::read_trusted(path)?),
        None => None,
    };
    if let Some(p) = &protocol {
        // The protocol names the lots unless the command line does.
        let l = &p.file.lots;
        if a.lots.files.is_empty() {
            a.lots.files = p.lot_files.clone();
        }
        if a.lots.lot_column.is_none() && a.lots.files.len() == 1 {
            a.lots.lot_column = l.lot_column.clone();
            if a.lots.lot_values.is_none() {
                a.lots.lot_values = l.values.as_ref().map(|v| v.join(","));
            }
        }
        if a.lots.sheet.is_none() {
            a.lots.sheet = l.sheet.clone();
        }
        // Its description first; an entry given on the command line replaces one of the
        // same name.
        let mut all = p.file.fields.clone();
        for f in fields {
            all.retain(|x: &report::FieldRecord| !x.name.eq_ignore_ascii_case(&f.name));
            all.push(f);
        }
        fields = all;
    }
    let spec = match &protocol {
        Some(p) if !a.spec.given() => p.spec.clone(),
        _ => a.spec.request()?,
    };
    let base = protocol
        .as_ref()
        .map_or_else(Settings::default, |p| p.settings.clone());
    let settings = Settings {
        alpha: a.alpha.unwrap_or(base.alpha),
        leave_one_out: base.leave_one_out && !a.no_holdout,
        checks: base.checks && !a.no_checks,
        permutations: a.permutations.unwrap_or(base.permutations),
        seed: a.seed.unwrap_or(base.seed),
        sequential: a.sequential(base.sequential)?,
    };
    let only = a
        .lots
        .characteristics
        .clone()
        .or_else(|| protocol.as_ref().map(|p| p.file.characteristics.clone()));
    let deviations = match &protocol {
        None => Vec::new(),
        Some(p) => {
            let compared: Vec<String> = only
                .clone()
                .unwrap_or_default()
                .into_iter()
                .filter(|c| {
                    !a.lots
                        .exclude
                        .iter()
                        .any(|e| data::match_key(e) == data::match_key(c))
                })
                .collect();
            let values = match &a.lots.lot_values {
                Some(text) => Some(parse_lot_values(text)?),
                None => None,
            };
            let column = a.lots.lot_column.as_deref().map(|c| {
                let v = values.as_ref();
                (
                    c,
                    [
                        v.map_or("", |v| v[0].as_str()),
                        v.map_or("", |v| v[1].as_str()),
                    ],
                )
            });
            let found = crate::protocol::differences(p, &compared, &settings, &spec, column);
            match (&a.deviation, found.is_empty()) {
                (_, true) => Vec::new(),
                (None, false) => {
                    let list: Vec<String> = found
                        .iter()
                        .map(|(what, want, got)| format!("{what}: {got} (protocol: {want})"))
                        .collect();
                    return Err(CliError::from(format!(
                        "the comparison asked for differs from the protocol {}: {}. Run it as \
                         fixed, or give --deviation REASON to run it so and record each \
                         difference as a deviation",
                        p.path.display(),
                        list.join("; ")
                    )));
                }
                (Some(reason), false) => {
                    if reason.trim().is_empty() {
                        return Err("--deviation needs a reason".into());
                    }
                    found
                        .into_iter()
                        .map(|(what, protocol, used)| report::Deviation {
                            what,
                            protocol,
                            used,
                            reason: reason.trim().to_string(),
                        })
                        .collect()
                }
            }
        }
    };
    let selection = Selection {
        only,
        exclude: a.lots.exclude.clone(),
    };
    let (c, mut record, inputs) = if a.in_database {
        let (c, record) = in_database(&a, &selection, settings, &spec)?;
        (c, record, None)
    } else {
        let mut lots = load_lots(&a.lots)?;
        let exclusions = match &a.lots.exclude_units {
            Some(path) => data::exclusions::load_exclusions(path, [&lots[0], &lots[1]])?,
            None => Vec::new(),
        };
        let request = Request {
            selection,
            settings,
            spec,
            strict_columns: a.lots.strict_columns,
            exclusions,
        };
        // The unit matrices take the numbers over, and the engine centres them in place:
        // memory holds one copy of the units.
        let (prepared, c) = pipeline::run_owned(&mut lots, &request, &Silent)?;
        let record = Record::new(&c, Some((&prepared, [&lots[0], &lots[1]])));
        (c, record, Some((prepared, lots)))
    };
    record.analysed_at = Some(sign::now_rfc3339());
    record.fields = fields;
    record.protocol = protocol
        .as_ref()
        .map(|p| crate::protocol::record_section(p, deviations));
    // Sign before printing anything, so a bad key or meaning stops with nothing written.
    let signed = match &a.sign {
        Some(key_path) => {
            let meaning = super::signing::meaning(a.meaning.as_deref().unwrap_or_default())?;
            let signer = super::signing::signer_name(a.signer.as_deref(), key_path)?;
            let key = super::signing::signing_key(key_path, a.passphrase_file.as_deref())?;
            let record_value = serde_json::to_value(&record)
                .map_err(|e| CliError::from(format!("the record cannot be signed: {e}")))?;
            Some(sign::first_signature(
                record_value,
                &key,
                &sign::Manifestation {
                    signer,
                    signed_at: sign::now_rfc3339(),
                    meaning,
                    comment: a.comment.as_deref().unwrap_or_default().trim().to_string(),
                },
            )?)
        }
        None => None,
    };
    if a.json.as_deref() != Some("-") {
        let names: [String; 2] = match &inputs {
            Some((_, lots)) => [0, 1].map(|g| lots[g].provenance.file_name.clone()),
            None => [0, 1].map(|g| {
                format!(
                    "{} = {} in {}",
                    a.lots.lot_column.as_deref().unwrap_or_default(),
                    c.lots[g].name,
                    a.lots.database.as_deref().unwrap_or_default()
                )
            }),
        };
        out(&report::render_text(
            &c,
            inputs.as_ref().map(|(p, _)| p),
            [&names[0], &names[1]],
            Some(&record),
        ));
    }
    // Who signed the protocol, against the trusted list when one is given: said plainly, the
    // comparison still runs (`verify --trusted` reports a partial verification).
    if let (Some(p), true) = (&record.protocol, a.json.as_deref() != Some("-")) {
        let path = a
            .trusted
            .as_ref()
            .map(|p| p.display().to_string())
            .unwrap_or_default();
        let (lines, short) = super::signing::protocol_signature_lines(
            p,
            trusted.as_ref().map(|l| (&l.list, path.as_str())),
        );
        if !p.signatures.is_empty() {
            for line in lines.iter().filter(|l| l.starts_with("signer")) {
                outln!("{line}");
            }
            if trusted.is_none() {
                outln!(
                    "protocol     its signers were not checked against a trusted list (give \
                     --trusted FILE)"
                );
            } else if !short.is_empty() {
                outln!("protocol     NOT FULLY TRUSTED:");
                for s in &short {
                    outln!("  - {s}");
                }
            }
        }
    }
    emit_json(&a.json, &record)?;
    if let (Some(summary), Some(out_path)) = (&signed, &a.out) {
        sign::write_summary(out_path, summary)
            .map_err(|e| format!("the signed summary was not written: {e}"))?;
        if a.json.as_deref() != Some("-") {
            outln!(
                "Signed summary written to {} (signed by {}, meaning {}, key {})",
                out_path.display(),
                summary.signatures[0].signer,
                summary.signatures[0].meaning,
                summary.signatures[0].key_fingerprint
            );
        }
    }
    if let Some(html_path) = &a.html {
        let html = html::render_html_signed(
            &record,
            signed.as_ref().map_or(&[][..], |s| s.signatures.as_slice()),
        );
        report::write_atomic(html_path, html.as_bytes())
            .map_err(|e| format!("the report was not written: {e}"))?;
    }
    Ok(if a.fail_on_shift && c.hotelling.differ {
        ExitCode::from(EXIT_SHIFT)
    } else {
        ExitCode::SUCCESS
    })
}

/// `statements`: the moments statement with the lot values written in, for a user to run.
pub(super) fn statements(a: StatementsArgs) -> CliResult {
    let dialect = crate::source::Dialect::parse(&a.dialect)?;
    let lots = parse_lot_values(&a.lot_values)?;
    let plan = crate::source::statements::Plan {
        query: a.query.trim().trim_end_matches(';').to_string(),
        lot_column: a.lot_column.clone(),
        lots: lots.clone(),
        columns: a.characteristics.clone(),
        labels: Vec::new(),
    };
    let literal = crate::source::Dialect::Generic;
    outln!(
        "-- lotshift {}: the moments of lots {} (reference) and {} (candidate) in \"{}\",",
        env!("CARGO_PKG_VERSION"),
        crate::source::statements::quote_literal(&lots[0]),
        crate::source::statements::quote_literal(&lots[1]),
        a.lot_column
    );
    outln!("-- two passes over each lot inside the engine: the means, then the centred sums.");
    outln!("-- Characteristics in order:");
    for (k, c) in a.characteristics.iter().enumerate() {
        outln!("--   {} = {}", k + 1, c);
    }
    outln!(
        "-- Save the result (one row per lot, every digit) as CSV and read it with:\n--   \
         lotshift compare-stats RESULT.csv --characteristics \"{}\" --lot-values \"{}\"",
        a.characteristics.join(","),
        a.lot_values
    );
    // Plain SQL in every dialect; generic writes the lot values in as quoted literals,
    // sqlite and postgresql as the parameters 1 and 2 of a prepared statement.
    if dialect != literal {
        outln!(
            "-- Parameters: 1 = {}, 2 = {}",
            crate::source::statements::quote_literal(&lots[0]),
            crate::source::statements::quote_literal(&lots[1])
        );
    }
    outln!("{};", plan.moments(dialect));
    Ok(ExitCode::SUCCESS)
}

/// `compare-stats` on the CSV result of `statements`.
fn compare_statement_result(a: &StatsArgs) -> CliResult {
    let names = a
        .characteristics
        .clone()
        .ok_or("a statements result needs --characteristics: the names given to statements")?;
    let lot = data::load(&a.file, &LoadOptions::default())?;
    let table = crate::source::ResultTable {
        columns: lot.columns.iter().map(|c| c.header.clone()).collect(),
        rows: (0..lot.len())
            .map(|i| {
                lot.columns
                    .iter()
                    .map(|c| match &c.data {
                        ColumnData::Numeric(v) if v[i].is_nan() => data::RawCell::Null,
                        ColumnData::Numeric(v) => data::RawCell::Number(v[i]),
                        ColumnData::Text(t) => data::RawCell::Text(t.get(i).to_string()),
                    })
                    .collect()
            })
            .collect(),
    };
    let lot_col = lot.column("lot").ok_or_else(|| {
        format!(
            "{}: no \"lot\" column: is this the result of lotshift statements?",
            a.file.display()
        )
    })?;
    let values: Vec<String> = (0..lot.len()).map(|i| lot_col.text(i)).collect();
    let order: [String; 2] = match &a.lot_values {
        Some(text) => parse_lot_values(text)?,
        None => match values.as_slice() {
            [x, y] => [x.clone(), y.clone()],
            _ => {
                return Err(CliError::from(format!(
                    "{}: {} rows; give --lot-values to choose the two lots",
                    a.file.display(),
                    values.len()
                )));
            }
        },
    };
    let p = names.len();
    let mut sums = Vec::with_capacity(2);
    for v in &order {
        let row = values
            .iter()
            .position(|x| x == v)
            .ok_or_else(|| format!("{}: no row for lot \"{v}\"", a.file.display()))?;
        sums.push(
            crate::source::aggregate::LotSums::from_result(&table, row, p)
                .map_err(|why| format!("{}, lot \"{v}\": {why}", a.file.display()))?,
        );
    }
    let (chars, units): (Vec<String>, Vec<Option<String>>) =
        names.iter().map(|n| data::split_header(n)).unzip();
    let settings = Settings {
        alpha: a.alpha.unwrap_or(0.05),
        leave_one_out: false,
        checks: true,
        permutations: 0,
        seed: analysis::DEFAULT_SEED,
        sequential: None,
    };
    let c = crate::source::aggregate::compare_sums(
        &chars,
        &units,
        [&order[0], &order[1]],
        [&sums[0], &sums[1]],
        &settings,
    )?;
    finish_summary(a, c)
}

/// The end of `compare-stats`: the specification, the text, the record, the exit status.
fn finish_summary(a: &StatsArgs, mut c: analysis::Comparison) -> CliResult {
    let plan = a.spec.request()?;
    if !plan.is_empty() {
        let given = plan.specification(&c.characteristics, &c.units)?;
        analysis::apply_specification(&mut c, &given, None)?;
    }
    let record = Record::new(&c, None);
    if a.json.as_deref() != Some("-") {
        let name = a.file.display().to_string();
        out(&report::render_text(&c, None, [&name, &name], None));
    }
    emit_json(&a.json, &record)?;
    Ok(if a.fail_on_shift && c.hotelling.differ {
        ExitCode::from(EXIT_SHIFT)
    } else {
        ExitCode::SUCCESS
    })
}

pub(super) fn compare_stats(a: StatsArgs) -> CliResult {
    let is_json = a
        .file
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("json"));
    if !is_json {
        return compare_statement_result(&a);
    }
    let text =
        std::fs::read_to_string(&a.file).map_err(|e| format!("{}: {e}", a.file.display()))?;
    let spec: StatsFile =
        serde_json::from_str(&text).map_err(|e| format!("{}: {e}", a.file.display()))?;
    let [l1, l2] = spec.lots.as_slice() else {
        return Err(CliError::from(format!(
            "{}: \"lots\" must hold exactly two lots",
            a.file.display()
        )));
    };
    let units = if spec.units.is_empty() {
        vec![None; spec.characteristics.len()]
    } else {
        spec.units.clone()
    };
    let settings = Settings {
        alpha: a.alpha.or(spec.alpha).unwrap_or(0.05),
        leave_one_out: false,
        checks: true,
        permutations: 0,
        seed: analysis::DEFAULT_SEED,
        sequential: None,
    };
    let c = analysis::compare_summaries(&spec.characteristics, &units, [l1, l2], &settings)
        .map_err(|e| format!("{}: {e}", a.file.display()))?;
    finish_summary(&a, c)
}

/// `compare --database … --in-database`: the comparison from aggregate statements.
fn in_database(
    a: &CompareArgs,
    selection: &Selection,
    settings: Settings,
    spec: &SpecRequest,
) -> Result<(analysis::Comparison, Record), CliError> {
    let source = query_source(&a.lots)?.ok_or("--in-database needs --database")?;
    if a.lots.exclude_units.is_some() {
        return Err(
            "--exclude-units sets units aside by row or label, which needs the units: run              without --in-database"
                .into(),
        );
    }
    let options = LoadOptions {
        sheet: None,
        labels: a.lots.labels.clone(),
    };
    let choice = crate::source::aggregate::Choice {
        only: selection.only.clone(),
        exclude: selection.exclude.clone(),
    };
    let settings = Settings {
        leave_one_out: false,
        permutations: 0,
        sequential: None,
        ..settings
    };
    let outcome =
        crate::source::aggregate::compare_in_database(&source, None, &options, &choice, &settings)?;
    let mut c = outcome.comparison;
    if !spec.is_empty() {
        let given = spec.specification(&c.characteristics, &c.units)?;
        analysis::apply_specification(&mut c, &given, None)?;
    }
    let record = crate::source::aggregate::record(&c, &outcome.lots, &source);
    Ok((c, record))
}
