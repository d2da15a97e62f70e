//! CSV/TSV with a header row: delimiter detection (comma, semicolon, tab), decimal comma,
//! UTF-8 with or without BOM (Latin-1 accepted for headers and labels), CRLF, quoted fields.
//!
//! One job, kept in one file: reading delimited text (sniffing, chunked reading, the fast decimal path) is one pass over the bytes.

use std::borrow::Cow;
use std::path::Path;

use super::header::Headers;
use super::{
    Cell, Column, ColumnData, LoadError, LoadErrorKind, LoadOptions, Lot, Provenance, TextColumn,
    classify, column_letter, parse_cell_bytes,
};

/// Rows used to decide each column's role.
const CLASSIFY_ROWS: usize = 1000;
/// Longest header cell accepted, in bytes.
const MAX_HEADER_CELL: usize = 4096;
/// Lines used to detect the delimiter.
const SNIFF_LINES: usize = 50;

fn decode(bytes: &[u8], latin1: bool) -> Cow<'_, str> {
    if latin1 {
        Cow::Owned(bytes.iter().map(|&b| b as char).collect())
    } else {
        match std::str::from_utf8(bytes) {
            Ok(s) => Cow::Borrowed(s),
            Err(_) => String::from_utf8_lossy(bytes),
        }
    }
}

/// Picks the delimiter giving a consistent field count over the first lines.
fn sniff_delimiter(sample: &[u8]) -> u8 {
    let mut best = (b',', 0usize, false);
    for delim in [b'\t', b';', b','] {
        let mut rdr = csv::ReaderBuilder::new()
            .has_headers(false)
            .flexible(true)
            .delimiter(delim)
            .from_reader(sample);
        let counts: Vec<usize> = rdr
            .byte_records()
            .take(SNIFF_LINES)
            .filter_map(Result::ok)
            .map(|r| r.len())
            .collect();
        let Some(&header) = counts.first() else {
            continue;
        };
        // The last sampled line may be cut short by the sample boundary.
        let body = &counts[..counts.len().saturating_sub(1).max(1)];
        let consistent = header > 1 && body.iter().all(|&c| c == header);
        let better = match (consistent, best.2) {
            (true, false) => true,
            (false, true) => false,
            _ => header > best.1,
        };
        if better {
            best = (delim, header, consistent);
        }
    }
    best.0
}

/// Number-like cells in the sample that use a decimal comma, and that use a decimal point.
fn decimal_marks(sample: &[u8], delim: u8) -> (usize, usize) {
    let (mut comma, mut point) = (0, 0);
    for field in sample.split(|&b| b == delim || b == b'\n' || b == b'\r') {
        let f = field.trim_ascii();
        let digits = f.iter().filter(|b| b.is_ascii_digit()).count();
        if digits == 0 || digits + 2 < f.len() {
            continue;
        }
        if f.contains(&b',') && !f.contains(&b'.') {
            comma += 1;
        } else if f.contains(&b'.') {
            point += 1;
        }
    }
    (comma, point)
}

/// Whether to read a decimal comma: always for semicolon files (spreadsheet exports that use
/// a semicolon use a decimal comma; a decimal point is read there too), and for tab files
/// when number-like cells use a comma and none a point.
fn sniff_decimal_comma(sample: &[u8], delim: u8) -> bool {
    let (comma, point) = decimal_marks(sample, delim);
    match delim {
        b';' => true,
        b'\t' => comma > 0 && point == 0,
        _ => false,
    }
}

/// The decimal mark the file's numbers were seen to use, as `inspect` reports it.
fn decimal_mark_seen(sample: &[u8], delim: u8, decimal_comma: bool) -> String {
    match (decimal_marks(sample, delim), decimal_comma) {
        ((0, 0), true) => "comma (no decimals in the first lines)".into(),
        ((0, 0), false) => "point (no decimals in the first lines)".into(),
        ((_, 0), _) => "comma".into(),
        ((0, _), _) => "point".into(),
        (_, true) => "comma and point (both read)".into(),
        (_, false) => "point".into(),
    }
}

/// True when the fast splitter reads the text exactly as the CSV parser would: no quote
/// characters, and no carriage return that is not part of a CRLF.
fn quote_free(body: &[u8]) -> bool {
    memchr::memchr(b'"', body).is_none()
        && memchr::memchr_iter(b'\r', body).all(|i| body.get(i + 1) == Some(&b'\n'))
}

/// Where the text is: in memory (BOM already removed), or in a file read in chunks.
#[derive(Clone, Copy)]
enum Source<'a> {
    Memory(&'a [u8]),
    /// A file; `skip` bytes (a byte-order mark) are not part of the text.
    File(&'a Path, u64),
}

/// What receives each record: its row and fields; returns whether to go on.
type RecordFn<'a> = dyn FnMut(usize, &[&[u8]]) -> Result<bool, LoadError> + 'a;

/// What receives each block of whole lines and whether it is the last; returns whether to
/// go on.
type BlockFn<'a> = dyn FnMut(&[u8], bool) -> Result<bool, LoadError> + 'a;

/// Bytes read from a file at a time.
const CHUNK: usize = 1 << 20;

/// Bytes the line-block reader asks for at a time. Kept well below the allocator's threshold
/// for giving big blocks their own mapping: a freed buffer above it raises the threshold, and
/// the next lot's columns would then come from the shared heap, which keeps their memory after
/// they move into the unit matrices (peak memory twice the numbers instead of once).
const READ: usize = 32 * 1024;

/// Calls `f(text, last)` for the text in blocks of whole lines (`last` marks the final block,
/// which may end without a line end), until `f` returns `Ok(false)`: text in memory as one
/// block, a file a chunk at a time so memory stays flat.
fn for_each_block(path: &str, source: Source<'_>, f: &mut BlockFn<'_>) -> Result<(), LoadError> {
    let io = |e: std::io::Error| LoadError::new(path, LoadErrorKind::Io(e.to_string()));
    match source {
        Source::Memory(body) => {
            f(body, true)?;
        }
        Source::File(p, skip) => {
            use std::io::{Read as _, Seek as _};
            let mut file = std::fs::File::open(p).map_err(io)?;
            file.seek(std::io::SeekFrom::Start(skip)).map_err(io)?;
            let mut buf: Vec<u8> = Vec::with_capacity(READ * 2);
            loop {
                let old = buf.len();
                buf.resize(old + READ, 0);
                let got = file.read(&mut buf[old..]).map_err(io)?;
                buf.truncate(old + got);
                let at_end = got == 0;
                // Whole lines only, except at the end of the file.
                let upto = if at_end {
                    buf.len()
                } else {
                    match memchr::memrchr(b'\n', &buf) {
                        Some(i) => i + 1,
                        None => continue,
                    }
                };
                if !f(&buf[..upto], at_end)? || at_end {
                    return Ok(());
                }
                buf.drain(..upto);
            }
        }
    }
    Ok(())
}

/// Calls `f(row, fields)` for each record, the row numbered as a spreadsheet shows it, until
/// `f` returns `Ok(false)`. Quote-free text is split directly (lines on `\n`, fields on the
/// delimiter), a file a chunk at a time so memory stays flat; anything else goes through the
/// csv crate. Empty lines are skipped by both.
fn for_each_record(
    path: &str,
    source: Source<'_>,
    delim: u8,
    fast: bool,
    f: &mut RecordFn<'_>,
) -> Result<(), LoadError> {
    let io = |e: std::io::Error| LoadError::new(path, LoadErrorKind::Io(e.to_string()));
    if fast {
        let mut line_no = 1usize;
        return for_each_block(path, source, &mut |block, last| {
            split_lines(block, delim, &mut line_no, last, f)
        });
    }
    let reader: Box<dyn std::io::Read + '_> = match source {
        Source::Memory(body) => Box::new(body),
        Source::File(p, skip) => {
            use std::io::{Read as _, Seek as _};
            let mut file = std::fs::File::open(p).map_err(io)?;
            file.seek(std::io::SeekFrom::Start(skip)).map_err(io)?;
            Box::new(std::io::BufReader::with_capacity(READ, file).take(u64::MAX))
        }
    };
    // The csv crate's own line numbers fall one behind after a CRLF line end, and its record
    // positions may point at the line ends before a record, so the row of a record is counted
    // here: the line ends before its first byte that is not a line end, plus one.
    let line_ends = std::rc::Rc::new(std::cell::RefCell::new(std::collections::VecDeque::new()));
    let reader = LineEnds {
        inner: reader,
        read: 0,
        ends: line_ends.clone(),
    };
    let mut lines_before = 0usize;
    let mut row_at = |byte: u64| {
        let mut ends = line_ends.borrow_mut();
        let mut at = byte;
        while let Some(&(offset, newline)) = ends.front() {
            if offset > at {
                break;
            }
            if offset == at {
                at += 1;
            }
            lines_before += usize::from(newline);
            ends.pop_front();
        }
        lines_before + 1
    };
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .delimiter(delim)
        .from_reader(reader);
    let mut rec = csv::ByteRecord::new();
    loop {
        match rdr.read_byte_record(&mut rec) {
            Ok(false) => return Ok(()),
            Ok(true) => {}
            Err(e) => {
                let row = e.position().map_or(0, |p| row_at(p.byte()));
                return Err(LoadError::at_row(
                    path,
                    row,
                    LoadErrorKind::Io(e.to_string()),
                ));
            }
        }
        let row = rec.position().map_or(0, |p| row_at(p.byte()));
        let quoted: Vec<&[u8]> = rec.iter().collect();
        if !f(row, &quoted)? {
            return Ok(());
        }
    }
}

/// A reader that notes the offset of every line-end byte that passes through it, and whether
/// it is a `\n` (for the row numbers of [`for_each_record`]'s csv path).
struct LineEnds<R> {
    inner: R,
    read: u64,
    ends: std::rc::Rc<std::cell::RefCell<std::collections::VecDeque<(u64, bool)>>>,
}

impl<R: std::io::Read> std::io::Read for LineEnds<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let got = self.inner.read(buf)?;
        let mut ends = self.ends.borrow_mut();
        ends.extend(
            memchr::memchr2_iter(b'\n', b'\r', &buf[..got])
                .map(|i| (self.read + i as u64, buf[i] == b'\n')),
        );
        self.read += got as u64;
        Ok(got)
    }
}

/// Splits quote-free text into records; `last` marks the end of the text (a final line
/// without a line end). Returns false when `f` asked to stop.
fn split_lines(
    text: &[u8],
    delim: u8,
    line_no: &mut usize,
    last: bool,
    f: &mut RecordFn<'_>,
) -> Result<bool, LoadError> {
    let mut fields: Vec<&[u8]> = Vec::new();
    let mut field_start = 0usize;
    let mut emit = |fields: &mut Vec<&[u8]>, line_no: usize| -> Result<bool, LoadError> {
        if let Some(last) = fields.last_mut()
            && let Some(l) = last.strip_suffix(b"\r")
        {
            *last = l;
        }
        let blank = fields.len() == 1 && fields[0].is_empty();
        let go_on = blank || f(line_no, fields)?;
        fields.clear();
        Ok(go_on)
    };
    // One pass over the text for both the delimiter and the line end.
    for i in memchr::memchr2_iter(delim, b'\n', text) {
        fields.push(&text[field_start..i]);
        field_start = i + 1;
        if text[i] == b'\n' {
            let go_on = emit(&mut fields, *line_no)?;
            *line_no += 1;
            if !go_on {
                return Ok(false);
            }
        }
    }
    if last && (field_start < text.len() || !fields.is_empty()) {
        fields.push(&text[field_start..]);
        let go_on = emit(&mut fields, *line_no)?;
        *line_no += 1;
        return Ok(go_on);
    }
    Ok(true)
}

/// What one pass over a text file learns: its hash and size, its first megabyte, whether it
/// is UTF-8, and whether the fast splitter reads it exactly.
struct Scan {
    sha256: String,
    size: u64,
    head: Vec<u8>,
    utf8: bool,
    quote_free: bool,
}

fn scan_file(path: &str, p: &Path) -> Result<Scan, LoadError> {
    use sha2::Digest as _;
    use std::io::Read as _;
    let io = |e: std::io::Error| LoadError::new(path, LoadErrorKind::Io(e.to_string()));
    let mut file = std::fs::File::open(p).map_err(io)?;
    let mut hasher = sha2::Sha256::new();
    let mut head = Vec::new();
    let mut buf = vec![0u8; CHUNK];
    let mut carry: Vec<u8> = Vec::new();
    let (mut size, mut utf8, mut quote_free, mut prev_cr) = (0u64, true, true, false);
    let mut first = true;
    loop {
        let got = file.read(&mut buf).map_err(io)?;
        if got == 0 {
            break;
        }
        let chunk = &buf[..got];
        hasher.update(chunk);
        size += got as u64;
        if head.len() < CHUNK {
            head.extend_from_slice(&chunk[..(CHUNK - head.len()).min(got)]);
        }
        if quote_free {
            if prev_cr && chunk[0] != b'\n' || memchr::memchr(b'"', chunk).is_some() {
                quote_free = false;
            } else {
                quote_free = memchr::memchr_iter(b'\r', chunk)
                    .all(|i| i + 1 == got || chunk[i + 1] == b'\n');
            }
            prev_cr = chunk[got - 1] == b'\r';
        }
        if utf8 {
            let body = if std::mem::take(&mut first) {
                chunk.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(chunk)
            } else {
                chunk
            };
            utf8 = validate_utf8_chunk(&mut carry, body);
        }
    }
    Ok(Scan {
        sha256: super::hex(&hasher.finalize()),
        size,
        head,
        utf8: utf8 && carry.is_empty(),
        quote_free,
    })
}

/// Checks one chunk of a text for UTF-8, carrying an incomplete final character (at most
/// three bytes) over to the next chunk. Returns false at the first invalid byte.
fn validate_utf8_chunk(carry: &mut Vec<u8>, mut data: &[u8]) -> bool {
    if !carry.is_empty() {
        // Complete the pending character with the first bytes of this chunk.
        let take = data.len().min(4 - carry.len().min(3));
        let mut joined = carry.clone();
        joined.extend_from_slice(&data[..take]);
        match std::str::from_utf8(&joined) {
            Ok(_) => {}
            Err(e) if e.valid_up_to() >= carry.len() => {
                // The pending character is complete; the rest is checked with the chunk.
                let used = e.valid_up_to() - carry.len();
                carry.clear();
                data = &data[used..];
                return validate_utf8_chunk(carry, data);
            }
            Err(e) if e.error_len().is_none() && take == data.len() => {
                *carry = joined;
                return true;
            }
            Err(_) => return false,
        }
        carry.clear();
        data = &data[take..];
    }
    match std::str::from_utf8(data) {
        Ok(_) => true,
        Err(e) if e.error_len().is_none() => {
            carry.extend_from_slice(&data[e.valid_up_to()..]);
            true
        }
        Err(_) => false,
    }
}

/// The lot a reader without a [`Scanner`] returns: it always reads to the end.
fn to_the_end(path: &str, lot: Option<Lot>) -> Result<Lot, LoadError> {
    lot.ok_or_else(|| {
        LoadError::new(
            path,
            LoadErrorKind::Io("the reader stopped before the end of the text".into()),
        )
    })
}

/// What the one-pass reader checks in each block of the file before it reads it: the hash of
/// every byte, UTF-8, and that the block is quote-free (what the two-pass reader learns from
/// [`scan_file`] first).
struct Scanner {
    hasher: sha2::Sha256,
    size: u64,
    /// A block that was not UTF-8 or not quote-free: the one-pass reader stopped there.
    left: bool,
}

impl Scanner {
    /// Hashes `block` and checks it; false when it is not plain UTF-8 quote-free text.
    fn take(&mut self, block: &[u8]) -> bool {
        use sha2::Digest as _;
        if !(quote_free(block) && std::str::from_utf8(block).is_ok()) {
            self.left = true;
            return false;
        }
        self.hasher.update(block);
        self.size += block.len() as u64;
        true
    }
}

/// Reads a file whose first megabyte is plain UTF-8 quote-free text in one pass: each block is
/// hashed and checked ([`Scanner`]) before its lines are read. `None` when the file is not of
/// that kind (a UTF-16 or quoted start, a decimal comma with a comma delimiter) or a later
/// block is not: the caller then reads it in two passes, so every file reads the same either
/// way.
fn read_file_one_pass(
    path: &str,
    p: &Path,
    options: &LoadOptions,
    provenance: &Provenance,
) -> Result<Option<Lot>, LoadError> {
    use sha2::Digest as _;
    use std::io::Read as _;
    let io = |e: std::io::Error| LoadError::new(path, LoadErrorKind::Io(e.to_string()));
    let size = std::fs::metadata(p).map_err(io)?.len();
    let mut head = Vec::with_capacity(CHUNK);
    std::fs::File::open(p)
        .map_err(io)?
        .take(CHUNK as u64)
        .read_to_end(&mut head)
        .map_err(io)?;
    let skip = if head.starts_with(b"\xEF\xBB\xBF") {
        3
    } else {
        0
    };
    let body = &head[skip..];
    // Whole lines of the head only: a chunk may end inside a line or a character.
    let lines = match memchr::memrchr(b'\n', body) {
        Some(i) if (head.len() as u64) < size => &body[..=i],
        _ => body,
    };
    // The header and the rows that decide each column's role must lie in the checked head.
    let whole = head.len() as u64 >= size;
    let plain = (whole || memchr::memchr_iter(b'\n', lines).count() > CLASSIFY_ROWS + 1)
        && !head.starts_with(&[0xFF, 0xFE])
        && !head.starts_with(&[0xFE, 0xFF])
        && !lines.is_empty()
        && quote_free(lines)
        && std::str::from_utf8(lines).is_ok();
    if !plain {
        return Ok(None);
    }
    let mut scanner = Scanner {
        hasher: sha2::Sha256::new(),
        size: skip as u64,
        left: false,
    };
    scanner.hasher.update(&head[..skip]);
    let mut provenance = provenance.clone();
    provenance.size_bytes = size;
    let lot = read_source(
        path,
        Source::File(p, skip as u64),
        body,
        true,
        true,
        size,
        options,
        provenance,
        Some(&mut scanner),
    )?;
    match lot {
        Some(mut lot) if !scanner.left => {
            lot.provenance.sha256 = super::hex(&scanner.hasher.finalize());
            lot.provenance.size_bytes = scanner.size;
            Ok(Some(lot))
        }
        _ => Ok(None),
    }
}

/// Reads a CSV/TSV lot file from disk in chunks: one pass to hash and check it, then the
/// passes of [`read`], so memory holds the numbers, not the file.
pub(super) fn read_file(
    path: &str,
    p: &Path,
    options: &LoadOptions,
    mut provenance: Provenance,
) -> Result<Lot, LoadError> {
    if let Some(lot) = read_file_one_pass(path, p, options, &provenance)? {
        return Ok(lot);
    }
    let scan = scan_file(path, p)?;
    provenance.sha256 = scan.sha256.clone();
    provenance.size_bytes = scan.size;
    if scan.head.starts_with(&[0xFF, 0xFE]) || scan.head.starts_with(&[0xFE, 0xFF]) {
        // UTF-16 is rare and must be converted whole: read it into memory.
        let bytes =
            std::fs::read(p).map_err(|e| LoadError::new(path, LoadErrorKind::Io(e.to_string())))?;
        return read(path, &bytes, options, provenance);
    }
    let skip = if scan.head.starts_with(b"\xEF\xBB\xBF") {
        3
    } else {
        0
    };
    read_source(
        path,
        Source::File(p, skip),
        &scan.head[skip as usize..],
        scan.utf8,
        scan.quote_free,
        scan.size,
        options,
        provenance,
        None,
    )
    .and_then(|lot| to_the_end(path, lot))
}

struct Builder {
    header: String,
    name: String,
    unit: Option<String>,
    position: usize,
    numeric: bool,
    values: Vec<f64>,
    text: TextColumn,
    missing: usize,
}

impl Builder {
    /// Appends a text cell as read (decoded, trimmed; an empty one counts as missing).
    fn push_text(&mut self, raw: &[u8], latin1: bool) {
        let text = decode(raw, latin1);
        let t = text.trim();
        if t.is_empty() {
            self.missing += 1;
        }
        self.text.push(t);
    }
}

/// Reads the data line that starts at `text[at..]` in a single pass when every cell is
/// plain: each number column a plain decimal ([`super::fast_decimal_prefix`]) that ends at
/// the delimiter, each text column anything up to it, exactly one field per column, and the
/// line ending in `\n`, `\r\n` or (`last`) the end of the text. The line end is found by the
/// parse itself, so the line is read once. Returns where the next line starts, with the
/// values appended to the columns; otherwise `None`, with nothing kept (every column is left
/// at `rows` values), and the caller reads the line by the general rules (missing cells,
/// other number forms, errors with their row and column). A line taken here gives the values
/// the general rules would give. `texts` is room for the text cells' spans, kept between
/// lines so that no line allocates.
#[allow(clippy::too_many_arguments)]
fn fast_row(
    text: &[u8],
    mut at: usize,
    last: bool,
    delim: u8,
    decimal_comma: bool,
    latin1: bool,
    columns: &mut [Builder],
    rows: usize,
    texts: &mut Vec<(usize, usize)>,
) -> Option<usize> {
    texts.clear();
    let final_column = columns.len().saturating_sub(1);
    let mut next = None;
    for (k, col) in columns.iter_mut().enumerate() {
        let end = if col.numeric {
            match super::fast_decimal_prefix(&text[at..], decimal_comma) {
                Some((v, used)) => {
                    col.values.push(v);
                    at + used
                }
                None => break,
            }
        } else {
            let rest = &text[at..];
            let end = memchr::memchr2(delim, b'\n', rest).map_or(text.len(), |i| at + i);
            // A `\r` before the line end belongs to the line end.
            let end = if k == final_column && end > at && text[end - 1] == b'\r' {
                end - 1
            } else {
                end
            };
            texts.push((at, end));
            end
        };
        if k == final_column {
            next = if end == text.len() && last {
                Some(end)
            } else if text.get(end) == Some(&b'\n') {
                Some(end + 1)
            } else if text.get(end..end + 2) == Some(b"\r\n") {
                Some(end + 2)
            } else {
                None
            };
        } else if text.get(end) == Some(&delim) {
            at = end + 1;
        } else {
            break;
        }
    }
    let Some(next) = next else {
        for col in columns.iter_mut().filter(|c| c.numeric) {
            col.values.truncate(rows);
        }
        return None;
    };
    let mut texts = texts.iter();
    for col in columns.iter_mut().filter(|c| !c.numeric) {
        if let Some(&(s, e)) = texts.next() {
            col.push_text(&text[s..e], latin1);
        }
    }
    Some(next)
}

pub(super) fn read(
    path: &str,
    bytes: &[u8],
    options: &LoadOptions,
    mut provenance: Provenance,
) -> Result<Lot, LoadError> {
    // UTF-16 with a byte-order mark (some spreadsheet "Unicode text" exports): decode it.
    let utf16 = if bytes.starts_with(&[0xFF, 0xFE]) || bytes.starts_with(&[0xFE, 0xFF]) {
        let little = bytes[0] == 0xFF;
        let units: Vec<u16> = bytes[2..]
            .chunks(2)
            .map(|c| {
                let pair = [c[0], c.get(1).copied().unwrap_or(0)];
                if little {
                    u16::from_le_bytes(pair)
                } else {
                    u16::from_be_bytes(pair)
                }
            })
            .collect();
        match String::from_utf16(&units) {
            Ok(text) => Some(text.into_bytes()),
            Err(_) => {
                return Err(LoadError::new(
                    path,
                    LoadErrorKind::Encoding(
                        "the file starts like UTF-16 text but is not valid UTF-16".into(),
                    ),
                ));
            }
        }
    } else {
        None
    };
    if utf16.is_some() {
        provenance
            .notes
            .push("the file is UTF-16 text; it was decoded".into());
    }
    let bytes = utf16.as_deref().unwrap_or(bytes);
    let body = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    let utf8 = std::str::from_utf8(body).is_ok();
    let fast = quote_free(body);
    let head = &body[..body.len().min(CHUNK)];
    read_source(
        path,
        Source::Memory(body),
        head,
        utf8,
        fast,
        bytes.len() as u64,
        options,
        provenance,
        None,
    )
    .and_then(|lot| to_the_end(path, lot))
}

/// The shared reader: `head` is the first megabyte of the text (after any byte-order mark).
#[allow(clippy::too_many_arguments)]
fn read_source(
    path: &str,
    source: Source<'_>,
    head: &[u8],
    utf8: bool,
    fast: bool,
    size: u64,
    options: &LoadOptions,
    mut provenance: Provenance,
    mut scanner: Option<&mut Scanner>,
) -> Result<Option<Lot>, LoadError> {
    if head[..head.len().min(8192)].contains(&0) {
        return Err(LoadError::new(path, LoadErrorKind::Binary));
    }
    if head.iter().all(|b| b.is_ascii_whitespace()) && (head.len() as u64) + 3 >= size {
        return Err(LoadError::new(path, LoadErrorKind::Empty));
    }
    let latin1 = !utf8;
    let sample_end = {
        let end = head.len().min(64 * 1024);
        // Extend to the end of a line so the sample holds whole records (up to 1 MiB: a longer
        // line is sniffed from its start).
        head[end..]
            .iter()
            .position(|&b| b == b'\n')
            .map_or(head.len(), |i| end + i + 1)
    };
    let delim = sniff_delimiter(&head[..sample_end]);
    let decimal_comma = sniff_decimal_comma(&head[..sample_end], delim);
    provenance.format = if delim == b'\t' { "tsv" } else { "csv" }.into();
    provenance.delimiter = Some(delim as char);
    provenance.decimal_comma = decimal_comma;
    provenance.decimal_mark = decimal_mark_seen(&head[..sample_end], delim, decimal_comma);
    provenance.encoding = Some(if latin1 { "Latin-1" } else { "UTF-8" }.into());
    if latin1 {
        provenance
            .notes
            .push("the file is not valid UTF-8; text was read as Latin-1".into());
    }
    // A guess at the number of rows, to size the columns once.
    let line_guess = {
        let lines = memchr::memchr_iter(b'\n', head).count().max(1);
        ((size as f64 / head.len().max(1) as f64) * lines as f64 * 1.05) as usize + 16
    };

    let mut header_fields: Vec<Vec<u8>> = Vec::new();
    for_each_record(path, source, delim, fast, &mut |_, fields| {
        header_fields = fields.iter().map(|f| f.to_vec()).collect();
        Ok(false)
    })?;
    if header_fields.is_empty() {
        return Err(LoadError::new(path, LoadErrorKind::Empty));
    }
    let header = header_fields;
    let mut headers = Headers::new(options);
    let mut columns: Vec<Builder> = Vec::with_capacity(header.len());
    for (pos, raw) in header.iter().enumerate() {
        if raw.len() > MAX_HEADER_CELL {
            return Err(LoadError {
                position: Some(pos),
                ..LoadError::at_row(path, 1, LoadErrorKind::HeaderTooLong { length: raw.len() })
            });
        }
        let text = decode(raw, latin1).trim().to_string();
        let (name, unit) = Headers::name(&text, pos);
        headers.claim(path, 1, &text, &name, pos)?;
        columns.push(Builder {
            header: text,
            name,
            unit,
            position: pos,
            numeric: true,
            values: Vec::new(),
            text: TextColumn::default(),
            missing: 0,
        });
    }
    let width = columns.len();

    // Decide each column's role from the first rows (read again in the full pass below).
    let mut counts = vec![(0usize, 0usize); width];
    let mut sampled = 0usize;
    let mut first = true;
    for_each_record(path, source, delim, fast, &mut |_, fields| {
        if std::mem::take(&mut first) {
            return Ok(true);
        }
        for (k, c) in counts.iter_mut().enumerate() {
            match fields.get(k).map(|b| parse_cell_bytes(b, decimal_comma)) {
                Some(Cell::Number(_) | Cell::Infinite) => c.0 += 1,
                Some(Cell::Text) => c.1 += 1,
                _ => {}
            }
        }
        sampled += 1;
        Ok(sampled < CLASSIFY_ROWS)
    })?;
    if sampled == 0 {
        return Err(LoadError::at_row(path, 1, LoadErrorKind::HeaderOnly));
    }
    for (col, &(num, txt)) in columns.iter_mut().zip(&counts) {
        col.numeric = classify(num, txt, headers.forced_label(&col.name, &col.header));
    }

    for col in columns.iter_mut() {
        if col.numeric {
            col.values.reserve_exact(line_guess);
        }
    }
    let mut rows: Vec<u32> = Vec::with_capacity(line_guess);
    let push = |rec: &[&[u8]],
                row: usize,
                columns: &mut [Builder],
                rows: &mut Vec<u32>|
     -> Result<(), LoadError> {
        if rec.len() < width {
            // A blank line inside the data reads as one empty field: treat as no unit.
            if rec.len() == 1 && rec[0].trim_ascii().is_empty() {
                return Ok(());
            }
            return Err(LoadError::at_row(
                path,
                row,
                LoadErrorKind::Ragged {
                    found: rec.len(),
                    expected: width,
                },
            ));
        }
        if rec.len() > width && rec[width..].iter().any(|f| !f.trim_ascii().is_empty()) {
            return Err(LoadError::at_row(
                path,
                row,
                LoadErrorKind::Ragged {
                    found: rec.len(),
                    expected: width,
                },
            ));
        }
        for (col, &raw) in columns.iter_mut().zip(rec) {
            if col.numeric {
                let text = || decode(raw, latin1);
                let v = match parse_cell_bytes(raw, decimal_comma) {
                    Cell::Number(v) => v,
                    Cell::Missing => {
                        col.missing += 1;
                        f64::NAN
                    }
                    Cell::Infinite => {
                        return Err(LoadError::at_cell(
                            path,
                            row,
                            &col.header,
                            col.position,
                            LoadErrorKind::NotFinite {
                                text: super::error::shorten(text().trim()),
                            },
                        ));
                    }
                    Cell::Text => {
                        return Err(LoadError::at_cell(
                            path,
                            row,
                            &col.header,
                            col.position,
                            LoadErrorKind::NotNumeric {
                                text: super::error::shorten(text().trim()),
                            },
                        ));
                    }
                };
                col.values.push(v);
            } else {
                col.push_text(raw, latin1);
            }
        }
        rows.push(u32::try_from(row).unwrap_or(u32::MAX));
        Ok(())
    };
    let mut first = true;
    let one_pass = fast && !(decimal_comma && delim == b',');
    if scanner.is_some() && !one_pass {
        return Ok(None);
    }
    if one_pass {
        // Quote-free text: each line read in one pass, numbers parsed where they stand
        // ([`fast_row`]); a line it does not take goes through the general rules.
        let mut line_no = 1usize;
        let mut texts = Vec::new();
        for_each_block(path, source, &mut |block, last| {
            if let Some(sc) = scanner.as_deref_mut()
                && !sc.take(block)
            {
                return Ok(false);
            }
            let mut start = 0usize;
            while start < block.len() {
                // Past the header, a line of plain cells is read where it stands.
                if !first
                    && !matches!(block[start], b'\n' | b'\r')
                    && let Some(next) = fast_row(
                        block,
                        start,
                        last,
                        delim,
                        decimal_comma,
                        latin1,
                        &mut columns,
                        rows.len(),
                        &mut texts,
                    )
                {
                    rows.push(u32::try_from(line_no).unwrap_or(u32::MAX));
                    line_no += 1;
                    start = next;
                    continue;
                }
                let end = memchr::memchr(b'\n', &block[start..]).map(|i| start + i);
                if end.is_none() && !last {
                    break;
                }
                let stop = end.unwrap_or(block.len());
                let raw = &block[start..stop];
                let line = raw.strip_suffix(b"\r").unwrap_or(raw);
                let row = line_no;
                line_no += 1;
                start = stop + 1;
                // A blank line is no record (as the field splitter reads it).
                if line.is_empty() {
                    continue;
                }
                if std::mem::take(&mut first) {
                    continue;
                }
                let fields: Vec<&[u8]> = line.split(|&b| b == delim).collect();
                push(&fields, row, &mut columns, &mut rows)?;
            }
            Ok(true)
        })?;
        if scanner.as_ref().is_some_and(|sc| sc.left) {
            return Ok(None);
        }
    } else {
        for_each_record(path, source, delim, fast, &mut |row, fields| {
            if std::mem::take(&mut first) {
                return Ok(true);
            }
            push(fields, row, &mut columns, &mut rows)?;
            Ok(true)
        })?;
    }
    if rows.is_empty() {
        return Err(LoadError::at_row(path, 1, LoadErrorKind::HeaderOnly));
    }
    let n = rows.len();
    let mut out = Vec::with_capacity(width);
    for col in columns {
        if col.header.is_empty() && col.missing == n {
            provenance.notes.push(format!(
                "column {} has no header and no values; ignored",
                column_letter(col.position)
            ));
            continue;
        }
        out.push(Column {
            header: col.header,
            name: col.name,
            unit: col.unit,
            position: col.position,
            data: if col.numeric {
                ColumnData::Numeric(col.values)
            } else {
                ColumnData::Text(col.text)
            },
            missing: col.missing,
        });
    }
    Ok(Some(Lot {
        name: String::new(),
        provenance,
        columns: out,
        rows,
    }))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn utf8_validation_across_any_chunk_split() {
        // Property: splitting a valid text anywhere keeps it valid; an invalid byte is found
        // wherever it falls.
        let text = "a µ b € c 😀 d ü".repeat(3);
        let bytes = text.as_bytes();
        for size in 1..=9 {
            let mut carry = Vec::new();
            let ok = bytes
                .chunks(size)
                .all(|c| validate_utf8_chunk(&mut carry, c));
            assert!(ok && carry.is_empty(), "chunk size {size}");
        }
        let mut bad = bytes.to_vec();
        bad[7] = 0xFF;
        for size in 1..=9 {
            let mut carry = Vec::new();
            let ok =
                bad.chunks(size).all(|c| validate_utf8_chunk(&mut carry, c)) && carry.is_empty();
            assert!(!ok, "chunk size {size}");
        }
    }

    /// Reads `text` as the one-pass line reader does (`fast`) or through the csv crate.
    fn read_both_ways(text: &[u8]) -> [Result<Lot, String>; 2] {
        [true, false].map(|fast| {
            let provenance = crate::data::Provenance::of_rows("t.csv", "csv");
            read_source(
                "t.csv",
                Source::Memory(text),
                &text[..text.len().min(CHUNK)],
                true,
                fast,
                text.len() as u64,
                &LoadOptions::default(),
                provenance,
                None,
            )
            .and_then(|lot| to_the_end("t.csv", lot))
            .map_err(|e| e.to_string())
        })
    }

    fn same_lot(a: &Lot, b: &Lot) -> bool {
        a.rows == b.rows
            && a.columns.len() == b.columns.len()
            && a.columns.iter().zip(&b.columns).all(|(x, y)| {
                x.header == y.header
                    && x.missing == y.missing
                    && match (&x.data, &y.data) {
                        (ColumnData::Numeric(u), ColumnData::Numeric(v)) => {
                            u.len() == v.len()
                                && u.iter().zip(v).all(|(p, q)| p.to_bits() == q.to_bits())
                        }
                        (u, v) => u == v,
                    }
            })
    }

    #[test]
    fn line_reader_reads_as_the_csv_crate() {
        // Property: the one-pass reader (numbers parsed where they stand, the line end found by
        // the parse) gives the very lot, or the very error, that the csv crate's records give,
        // on texts mixing plain and other number forms, missing and bad cells, text columns,
        // CRLF and LF line ends, blank lines, ragged lines and a final line with no line end.
        let numbers = [
            "1.5",
            "-0.25",
            "12",
            "+3.125",
            "0",
            "-0",
            "",
            "NA",
            "1e3",
            " 7.5",
            "9.",
            ".5",
            "123456789.123456",
            "1234567890123456789",
            "-",
            "x",
        ];
        let texts = ["lotA", "", "b c", "7"];
        let mut rng = crate::stats::permutation::SplitMix64(11);
        let mut pick = |n: usize| (rng.next_u64() % n as u64) as usize;
        for case in 0..600 {
            let width = 1 + pick(4);
            let text_col = if pick(3) == 0 {
                Some(pick(width))
            } else {
                None
            };
            let mut t = String::new();
            let header: Vec<String> = (0..width).map(|k| format!("h{k}")).collect();
            t.push_str(&header.join(","));
            t.push('\n');
            let lines = 1 + pick(30);
            for line in 0..lines {
                let eol = if pick(4) == 0 { "\r\n" } else { "\n" };
                if pick(12) == 0 {
                    t.push_str(eol);
                }
                let mut cells: Vec<&str> = (0..width)
                    .map(|k| {
                        if Some(k) == text_col {
                            texts[pick(texts.len())]
                        } else if line < 3 || pick(5) != 0 {
                            numbers[pick(5)]
                        } else {
                            numbers[pick(numbers.len())]
                        }
                    })
                    .collect();
                if pick(40) == 0 {
                    cells.push("1");
                }
                if pick(40) == 0 {
                    cells.pop();
                }
                t.push_str(&cells.join(","));
                if line + 1 < lines || pick(2) == 0 {
                    t.push_str(eol);
                }
            }
            let [one_pass, records] = read_both_ways(t.as_bytes());
            match (&one_pass, &records) {
                (Ok(a), Ok(b)) => assert!(same_lot(a, b), "case {case}: {t:?}"),
                (Err(a), Err(b)) => assert_eq!(a, b, "case {case}: {t:?}"),
                _ => panic!("case {case}: {t:?}: {one_pass:?} against {records:?}"),
            }
        }
    }

    #[test]
    fn line_reader_across_file_blocks() {
        // The file is read in blocks of whole lines: lines of every kind that straddle a block
        // boundary read as the csv crate reads the same text.
        let mut t = String::from("a,b,label\r\n");
        for i in 0..40_000 {
            let eol = if i % 3 == 0 { "\r\n" } else { "\n" };
            match i % 97 {
                5 => t.push_str(&format!(",{i}.5,x{eol}")),
                6 => t.push_str(eol),
                7 => t.push_str(&format!("1e{},-{i},y z{eol}", i % 5)),
                _ => t.push_str(&format!("{i}.25,-{}.{},lot{eol}", i % 1000, i % 7)),
            }
        }
        t.push_str("3.5,4.5,end");
        let dir = std::env::temp_dir().join(format!("lotshift-blocks-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("blocks.csv");
        std::fs::write(&path, &t).unwrap();
        let from_file = crate::data::load(&path, &LoadOptions::default()).unwrap();
        let _ = std::fs::remove_dir_all(&dir);
        let [_, records] = read_both_ways(t.as_bytes());
        let records = records.unwrap();
        let blank = (0..40_000).filter(|i| i % 97 == 6).count();
        assert_eq!(from_file.rows.len(), 40_000 - blank + 1);
        assert!(same_lot(&from_file, &records));
    }
}
