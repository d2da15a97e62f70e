//! `inspect`: what lotshift sees in a file.

#[allow(unused_imports)]
use super::*;

pub(super) fn inspect(a: InspectArgs) -> CliResult {
    let options = LoadOptions {
        sheet: a.sheet.clone(),
        labels: a.labels.clone(),
    };
    let lot = data::load(&a.file, &options)?;
    let p = &lot.provenance;
    outln!("file        {}", p.path);
    outln!("sha256      {}", p.sha256);
    outln!("size        {} bytes", p.size_bytes);
    outln!("format      {}", p.format);
    if let Some(d) = p.delimiter {
        let name = match d {
            '\t' => "tab".to_string(),
            ',' => "comma".to_string(),
            ';' => "semicolon".to_string(),
            other => format!("{other:?}"),
        };
        outln!("delimiter   {name}");
        outln!("decimal     {}", p.decimal_mark);
    }
    if let Some(e) = &p.encoding {
        outln!("encoding    {e}");
    }
    if let Some(s) = &p.sheet {
        outln!("sheet       {s}");
    }
    outln!(
        "data rows   {} (rows {}..{})",
        lot.len(),
        lot.rows.first().unwrap_or(&0),
        lot.rows.last().unwrap_or(&0)
    );
    for n in &p.notes {
        outln!("note        {n}");
    }
    outln!("\ncolumns");
    outln!(
        "  {:<4} {:<28} {:<15} {:<10} {:>8}",
        "col",
        "header",
        "role",
        "unit",
        "missing"
    );
    for c in &lot.columns {
        let role = if c.is_numeric() {
            "characteristic"
        } else {
            "label"
        };
        outln!(
            "  {:<4} {:<28} {:<15} {:<10} {:>8}",
            data::column_letter(c.position),
            c.header,
            role,
            c.unit.as_deref().unwrap_or("-"),
            c.missing
        );
    }
    let shown = a.rows.min(lot.len());
    if shown > 0 {
        outln!("\nfirst {shown} rows");
        for i in 0..shown {
            let cells: Vec<String> = lot
                .columns
                .iter()
                .map(|c| match &c.data {
                    ColumnData::Numeric(v) if v[i].is_nan() => "(missing)".to_string(),
                    _ => c.text(i),
                })
                .collect();
            outln!("  row {:<6} {}", lot.rows[i], cells.join(" | "));
        }
    }
    Ok(ExitCode::SUCCESS)
}
