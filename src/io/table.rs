//! Line-aware reader for small delimited text tables.
//!
//! Every input format of taumap (impedance spectra, step transients) is a
//! header line followed by rows of numbers. This module reads such a file
//! into a [`Table`] that remembers, for every row, the physical line it came
//! from, so that later checks can point at `FILE:LINE`.
//!
//! Accepted layout:
//!
//! - UTF-8 text, optionally starting with a byte-order mark; UTF-16 (with
//!   or without a byte-order mark) is transcoded; a line that is not UTF-8
//!   is read as Windows-1252 (Latin-1); control characters (a binary file)
//!   are refused;
//! - line ends `\n`, `\r\n` or a lone `\r`;
//! - comment lines, whose first non-blank character is `#`, and blank lines
//!   are skipped anywhere in the file; so are lines holding nothing but
//!   delimiters and spaces (spreadsheets pad exports with them);
//! - the first other line is the header; its fields are the column names;
//! - the delimiter is a comma, a semicolon or a tab, whichever occurs most
//!   often (outside double quotes) in the header line; on a tie the earlier
//!   of comma, semicolon, tab wins;
//! - spaces around fields are ignored; a field may be enclosed in double
//!   quotes, with `""` standing for one quote inside it;
//! - every data row has exactly as many fields as the header, after empty
//!   fields at its end (a trailing delimiter) are dropped;
//! - a block of free text may stand above the header when the reader says
//!   what a header must name ([`TableReader::find_header`]);
//! - lines of at most [`MAX_LINE_BYTES`] bytes.

use std::io::BufRead;
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// The delimiters recognised in a header line, in tie-breaking order.
pub const DELIMITERS: [char; 3] = [',', ';', '\t'];

/// The file and header of a table: what every check of its rows needs.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TableHead {
    /// The file the table was read from (used in error messages only).
    pub path: PathBuf,
    /// The delimiter detected from the header line.
    pub delimiter: char,
    /// Column names as written (trimmed, quotes removed), one per field.
    pub header: Vec<String>,
    /// The header line as written, trimmed, for quoting in messages.
    pub header_text: String,
    /// 1-based physical line number of the header.
    pub header_line: usize,
    /// First and last line of the free text skipped above the header, if
    /// any (comments and blank lines are not counted).
    pub preamble: Option<(usize, usize)>,
    /// The decimal separator of the file and the line that first showed
    /// it, once a number with a point or (where allowed) a comma has been
    /// read: a file writes one or the other, never both.
    pub decimal: std::cell::Cell<Option<(char, usize)>>,
}

/// A delimited text table: a header and the data rows below it.
/// Dereferences to its [`TableHead`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Table {
    /// File and header.
    pub head: TableHead,
    /// Data rows in file order; each has `header.len()` fields.
    pub rows: Vec<Row>,
}

impl std::ops::Deref for Table {
    type Target = TableHead;
    fn deref(&self) -> &TableHead {
        &self.head
    }
}

/// One data row of a [`Table`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Row {
    /// 1-based physical line number in the file.
    pub line: usize,
    /// Field texts, trimmed, quotes removed.
    pub fields: Vec<String>,
}

/// Reads a delimited table from `reader`.
///
/// `path` is only used to label errors. `example_header` is shown when the
/// file holds no header at all, e.g. `"frequency_hz,z_re_ohm,z_im_ohm"`.
///
/// Fails with [`Error::Io`] when reading fails and with [`Error::Parse`]
/// (at the offending line) when the file is empty, is not UTF-8, has an
/// unterminated quote or a row with the wrong number of fields.
pub fn read_table<R: BufRead>(reader: R, path: &Path, example_header: &str) -> Result<Table> {
    let mut stream = TableReader::new(reader, path, example_header)?;
    let mut rows = Vec::new();
    while let Some(row) = stream.next_row()? {
        rows.push(row);
    }
    Ok(Table {
        head: stream.head,
        rows,
    })
}

/// A delimited table read one row at a time, in memory bounded by the
/// longest line: for records too long to hold as text (a data logger's
/// million samples). Same layout and errors as [`read_table`]. Lines are
/// pulled up to each `\n`, so a file whose only line ends are lone `\r`
/// (old Mac text) is held whole while it is split.
/// Dereferences to its [`TableHead`].
#[derive(Debug)]
pub struct TableReader<R: BufRead> {
    reader: R,
    /// File and header.
    pub head: TableHead,
    lines: LineSource,
}

impl<R: BufRead> std::ops::Deref for TableReader<R> {
    type Target = TableHead;
    fn deref(&self) -> &TableHead {
        &self.head
    }
}

/// Longest physical line accepted, in bytes of UTF-8 text (1 MiB): a
/// line of numbers is a few dozen bytes, so a longer one is not a table
/// row, and the limit keeps memory bounded on a file without line ends.
pub const MAX_LINE_BYTES: usize = 1 << 20;

/// The text encoding a table was read in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum TextEncoding {
    /// UTF-8 (or plain ASCII), with or without a byte-order mark.
    #[default]
    Utf8,
    /// UTF-16, little-endian; with a byte-order mark or recognised by the
    /// zero high bytes of ASCII text.
    Utf16Le,
    /// UTF-16, big-endian.
    Utf16Be,
    /// Some lines were not UTF-8 and were read as Windows-1252, the
    /// superset of ISO 8859-1 (Latin-1) that Western-European systems
    /// export (a `µ` or `°` byte in a heading).
    Latin1,
}

impl TextEncoding {
    /// A short name for messages and reports.
    pub fn name(self) -> &'static str {
        match self {
            TextEncoding::Utf8 => "UTF-8",
            TextEncoding::Utf16Le => "UTF-16LE",
            TextEncoding::Utf16Be => "UTF-16BE",
            TextEncoding::Latin1 => "Latin-1 (Windows-1252)",
        }
    }
}

/// Physical lines pulled from a reader in bounded memory, numbered from 1:
/// ends `\n`, `\r\n` or a lone `\r`; a leading byte-order mark is dropped;
/// UTF-16 is transcoded on the fly; a line that is not UTF-8 is read as
/// Windows-1252 (Latin-1).
#[derive(Default)]
struct LineSource {
    line: usize,
    started: bool,
    eof: bool,
    /// The previous line ended with `\r` at the end of the buffer: a `\n`
    /// arriving next belongs to it.
    pending_cr: bool,
    /// UTF-8 text read but not yet returned, from `pos` on.
    buf: Vec<u8>,
    pos: usize,
    decoder: Option<encoding_rs::Decoder>,
    encoding: TextEncoding,
}

impl std::fmt::Debug for LineSource {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("LineSource")
            .field("line", &self.line)
            .field("encoding", &self.encoding)
            .field("buffered", &(self.buf.len() - self.pos))
            .finish_non_exhaustive()
    }
}

impl LineSource {
    /// Appends the next chunk of the reader to `buf` (as UTF-8); sets `eof`
    /// at the end.
    fn fill<R: BufRead>(&mut self, reader: &mut R, path: &Path) -> Result<()> {
        let read = |reader: &mut R| -> Result<Vec<u8>> {
            loop {
                match reader.fill_buf() {
                    Ok(c) => {
                        let chunk = c.to_vec();
                        reader.consume(chunk.len());
                        return Ok(chunk);
                    }
                    Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                    Err(source) => {
                        return Err(Error::Io {
                            path: path.to_path_buf(),
                            source,
                        });
                    }
                }
            }
        };
        let mut chunk = read(reader)?;
        if !self.started {
            self.started = true;
            // A byte-order mark or the zero bytes of UTF-16 need the first
            // four bytes, which a pipe may deliver one at a time.
            while chunk.len() < 4 {
                let more = read(reader)?;
                if more.is_empty() {
                    break;
                }
                chunk.extend_from_slice(&more);
            }
            if chunk.starts_with(b"\xEF\xBB\xBF") {
                chunk.drain(..3);
            } else if let Some((encoding, dec)) = sniff_utf16(&chunk) {
                self.encoding = encoding;
                self.decoder = Some(dec);
            }
            if chunk.is_empty() {
                // A file of a byte-order mark alone: read on to the end.
                chunk = read(reader)?;
            }
        }
        let last = chunk.is_empty();
        match self.decoder.as_mut() {
            Some(dec) => {
                let needed = dec
                    .max_utf8_buffer_length(chunk.len())
                    .unwrap_or(chunk.len().saturating_mul(3) + 16);
                let start = self.buf.len();
                self.buf.resize(start + needed, 0);
                let (_, used, written, _) =
                    dec.decode_to_utf8(&chunk, &mut self.buf[start..], last);
                debug_assert_eq!(
                    used,
                    chunk.len(),
                    "the buffer was sized for the whole chunk"
                );
                self.buf.truncate(start + written);
            }
            None => self.buf.extend_from_slice(&chunk),
        }
        if last {
            self.eof = true;
        }
        Ok(())
    }

    /// The next physical line, or `None` at the end of the input.
    fn next<R: BufRead>(&mut self, reader: &mut R, path: &Path) -> Result<Option<(usize, String)>> {
        let mut scanned = 0;
        let raw = loop {
            if self.pending_cr && self.pos < self.buf.len() {
                if self.buf[self.pos] == b'\n' {
                    self.pos += 1;
                }
                self.pending_cr = false;
            }
            let rest = &self.buf[self.pos..];
            if let Some(i) = rest[scanned.min(rest.len())..]
                .iter()
                .position(|b| *b == b'\n' || *b == b'\r')
                .map(|i| i + scanned)
            {
                if i > MAX_LINE_BYTES {
                    return Err(long_line(path, self.line + 1, rest));
                }
                let ended_by_cr = rest[i] == b'\r';
                let raw = rest[..i].to_vec();
                self.pos += i + 1;
                if ended_by_cr {
                    self.pending_cr = true;
                }
                break raw;
            }
            scanned = rest.len();
            if scanned > MAX_LINE_BYTES {
                return Err(long_line(path, self.line + 1, rest));
            }
            if self.eof {
                if rest.is_empty() {
                    return Ok(None);
                }
                let raw = rest.to_vec();
                self.pos = self.buf.len();
                break raw;
            }
            // Keep only the unread tail before reading more.
            self.buf.drain(..self.pos);
            self.pos = 0;
            self.fill(reader, path)?;
        };
        self.line += 1;
        let line_no = self.line;
        let text = match String::from_utf8(raw) {
            Ok(text) => text,
            Err(e) => {
                // Not UTF-8: Windows-1252 maps every byte, and is what a
                // Western-European spreadsheet writes.
                self.encoding = TextEncoding::Latin1;
                encoding_rs::WINDOWS_1252
                    .decode_without_bom_handling(e.as_bytes())
                    .0
                    .into_owned()
            }
        };
        if let Some((at, c)) = text
            .chars()
            .enumerate()
            .find(|(_, c)| c.is_control() && *c != '\t' && !('\u{80}'..='\u{9f}').contains(c))
        {
            return Err(Error::Parse {
                path: path.to_path_buf(),
                line: line_no,
                msg: format!(
                    "control character U+{:04X} at column {}: this looks like a binary file \
                     (export the data as delimited text, e.g. CSV)",
                    c as u32,
                    at + 1
                ),
            });
        }
        Ok(Some((line_no, text)))
    }
}

/// The error for a line longer than [`MAX_LINE_BYTES`], quoting its start.
fn long_line(path: &Path, line: usize, text: &[u8]) -> Error {
    let head: String = String::from_utf8_lossy(&text[..text.len().min(160)])
        .chars()
        .take(40)
        .collect();
    Error::Parse {
        path: path.to_path_buf(),
        line,
        msg: format!(
            "line is longer than {MAX_LINE_BYTES} bytes (it starts \"{head}...\"); \
             a table row is a short line of numbers"
        ),
    }
}

/// Recognises UTF-16 text by its byte-order mark, or, without one, by the
/// zero high bytes of its first two ASCII characters.
fn sniff_utf16(head: &[u8]) -> Option<(TextEncoding, encoding_rs::Decoder)> {
    use encoding_rs::{UTF_16BE, UTF_16LE};
    match head {
        [0xFF, 0xFE, ..] => Some((
            TextEncoding::Utf16Le,
            UTF_16LE.new_decoder_with_bom_removal(),
        )),
        [0xFE, 0xFF, ..] => Some((
            TextEncoding::Utf16Be,
            UTF_16BE.new_decoder_with_bom_removal(),
        )),
        [a, 0, b, 0, ..] if *a != 0 && *b != 0 => Some((
            TextEncoding::Utf16Le,
            UTF_16LE.new_decoder_without_bom_handling(),
        )),
        [0, a, 0, b, ..] if *a != 0 && *b != 0 => Some((
            TextEncoding::Utf16Be,
            UTF_16BE.new_decoder_without_bom_handling(),
        )),
        _ => None,
    }
}

/// Lines of free text (not comments) searched for a header before a file is
/// declared header-less: instrument exports put tens of lines of settings
/// above the table, never thousands.
pub const MAX_PREAMBLE_LINES: usize = 1000;

/// No line of a file's head was accepted as its header; see
/// [`TableReader::find_header`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NoHeader {
    /// The first line that is not blank or a comment, read as a header.
    pub first: TableHead,
    /// Number of such lines examined.
    pub examined: usize,
    /// Physical line number of the last line examined.
    pub last_line: usize,
    /// Physical line number of the last line of text examined (before the
    /// line of numbers, when the search stopped at one).
    pub last_text_line: usize,
    /// The search stopped at a line of numbers (data before any header).
    pub stopped_at_data: bool,
    /// A line examined held numbers separated by spaces only.
    pub space_separated: bool,
}

impl NoHeader {
    /// Whether one line at most was a candidate: the first line read, or
    /// the first line above the data. Its own faults then explain the
    /// failure better than [`Self::error`] does.
    pub fn single_candidate(&self) -> bool {
        self.examined - usize::from(self.stopped_at_data) <= 1
    }

    /// The error to report when the caller has nothing more specific:
    /// names the lines searched and the header expected.
    pub fn error(&self, wanted: &str, example_header: &str) -> Error {
        let first = &self.first;
        let range = if first.header_line == self.last_text_line {
            format!("line {}", first.header_line)
        } else {
            format!("lines {}-{}", first.header_line, self.last_text_line)
        };
        let verb = if first.header_line == self.last_text_line {
            "names"
        } else {
            "name"
        };
        let stop = if self.stopped_at_data {
            format!(", and line {} already holds numbers", self.last_line)
        } else {
            String::new()
        };
        let spaces = if self.space_separated {
            "; columns separated by spaces are not read: use commas, semicolons or tabs"
        } else {
            ""
        };
        first.error(
            first.header_line,
            format!(
                "no header line found: {range} {verb} no {wanted}{stop} \
                 (first line read: \"{}\"; expected a header line such as \"{example_header}\"{spaces})",
                excerpt(&first.header_text)
            ),
        )
    }
}

impl TableHead {
    /// Whether every field of the header reads as a number: a file that
    /// starts with data and has no header.
    pub fn looks_like_data(&self) -> bool {
        self.header
            .iter()
            .all(|h| !h.trim().is_empty() && parse_number(h, self.decimal_comma()).is_ok())
    }
}

impl<R: BufRead> TableReader<R> {
    /// Reads up to and including the header line, the first line that is
    /// not blank or a comment.
    ///
    /// Fails as [`read_table`] does for an empty file, a file without a
    /// header, bad encoding or an unterminated quote in the header.
    pub fn new(reader: R, path: &Path, example_header: &str) -> Result<Self> {
        match Self::find_header(reader, path, example_header, |_| true)? {
            Ok(table) => Ok(table),
            Err(no) => Err(no.error("columns", example_header)),
        }
    }

    /// Reads up to and including the first line that `is_header` accepts,
    /// skipping a block of free text above it (an instrument's settings,
    /// written without `#`): the lines skipped are recorded in
    /// [`TableHead::preamble`].
    ///
    /// Returns `Ok(Err(NoHeader))` when no line is accepted before the end
    /// of the file, before a line of numbers (data without a header) or
    /// within [`MAX_PREAMBLE_LINES`] lines; the caller explains why from
    /// [`NoHeader::first`]. Fails for an empty file, a file of comments,
    /// bad encoding, or an unterminated quote in the accepted line.
    pub fn find_header(
        mut reader: R,
        path: &Path,
        example_header: &str,
        is_header: impl Fn(&TableHead) -> bool,
    ) -> Result<std::result::Result<Self, NoHeader>> {
        let mut lines = LineSource::default();
        let mut saw_comment = false;
        let mut first: Option<TableHead> = None;
        let mut last_skipped = 0;
        let mut space_separated = false;
        let mut examined = 0;
        loop {
            let Some((line_no, text)) = lines.next(&mut reader, path)? else {
                if let Some(first) = first {
                    return Ok(Err(NoHeader {
                        first,
                        examined,
                        last_line: lines.line,
                        last_text_line: last_skipped,
                        stopped_at_data: false,
                        space_separated,
                    }));
                }
                let msg = if saw_comment {
                    format!(
                        "no header line found, only comments and blank lines \
                         (expected a header line such as \"{example_header}\")"
                    )
                } else {
                    format!("file is empty (expected a header line such as \"{example_header}\")")
                };
                return Err(Error::Parse {
                    path: path.to_path_buf(),
                    line: 1,
                    msg,
                });
            };
            let trimmed = text.trim();
            if trimmed.is_empty() {
                continue;
            }
            if trimmed.starts_with('#') {
                saw_comment = true;
                continue;
            }
            examined += 1;
            let delimiter = detect_delimiter(&text);
            let split = split_fields(&text, delimiter);
            let head = TableHead {
                path: path.to_path_buf(),
                delimiter,
                header: split.clone().map(trim_trailing_empty).unwrap_or_default(),
                header_text: trimmed.to_string(),
                header_line: line_no,
                preamble: first.as_ref().map(|f| (f.header_line, last_skipped)),
                decimal: std::cell::Cell::new(None),
            };
            let data_like = head.header.len() >= 2
                && head
                    .header
                    .iter()
                    .all(|f| f.is_empty() || parse_number(f, delimiter != ',').is_ok());
            if !data_like && is_header(&head) {
                // Only the accepted line must split cleanly: free text above
                // it may hold stray quotes.
                if let Err(msg) = split {
                    return Err(head.error(line_no, msg));
                }
                return Ok(Ok(Self {
                    reader,
                    head,
                    lines,
                }));
            }
            let text_before = last_skipped;
            space_separated |= head.header.len() == 1 && {
                let tokens: Vec<&str> = trimmed.split_whitespace().collect();
                tokens.len() >= 2 && tokens.iter().all(|t| parse_number(t, false).is_ok())
            };
            if !data_like {
                last_skipped = line_no;
            }
            let first_head = first.get_or_insert(head);
            if data_like || examined >= MAX_PREAMBLE_LINES {
                if let Err(msg) = split_fields(&first_head.header_text, first_head.delimiter) {
                    return Err(first_head.error(first_head.header_line, msg));
                }
                return Ok(Err(NoHeader {
                    first: first_head.clone(),
                    examined,
                    last_line: line_no,
                    last_text_line: if data_like {
                        text_before.max(first_head.header_line)
                    } else {
                        line_no
                    },
                    stopped_at_data: data_like,
                    space_separated,
                }));
            }
        }
    }

    /// The text encoding the file has been read in so far (a Latin-1 line
    /// further down can still change it).
    pub fn encoding(&self) -> TextEncoding {
        self.lines.encoding
    }

    /// The next data row, skipping comments, blank lines and lines of
    /// delimiters only; `None` at the end of the file.
    pub fn next_row(&mut self) -> Result<Option<Row>> {
        while let Some((line_no, text)) = self.lines.next(&mut self.reader, &self.head.path)? {
            let trimmed = text.trim();
            if trimmed.is_empty() || trimmed.starts_with('#') {
                continue;
            }
            let fields = split_fields(&text, self.head.delimiter)
                .map_err(|msg| self.head.error(line_no, msg))?;
            if fields.iter().all(String::is_empty) {
                continue;
            }
            let fields = if fields.len() > self.head.header.len() {
                trim_trailing_empty(fields)
            } else {
                fields
            };
            if fields.len() != self.head.header.len() {
                return Err(self.head.error(
                    line_no,
                    format!(
                        "expected {} fields, found {}",
                        self.head.header.len(),
                        fields.len()
                    ),
                ));
            }
            return Ok(Some(Row {
                line: line_no,
                fields,
            }));
        }
        Ok(None)
    }
}

impl Row {
    /// Field `col` (0-based) as text, or `""` when the row is shorter.
    pub fn field(&self, col: usize) -> &str {
        self.fields.get(col).map_or("", String::as_str)
    }
}

impl TableHead {
    /// Indices (0-based) of the columns whose normalised name (see
    /// [`normalize_name`]) equals one of `aliases`, which must be lower case.
    pub fn find_columns(&self, aliases: &[&str]) -> Vec<usize> {
        self.header
            .iter()
            .enumerate()
            .filter(|(_, name)| name_matches(name, aliases))
            .map(|(i, _)| i)
            .collect()
    }

    /// The column name as written, or `""` when `col` is out of range.
    pub fn column_name(&self, col: usize) -> &str {
        self.header.get(col).map_or("", String::as_str)
    }

    /// Parses field `col` of `row` as a finite number; see [`parse_finite`].
    /// A decimal comma is accepted unless the delimiter is a comma.
    ///
    /// A field missing from `row` reads as an empty field.
    ///
    /// Where decimal commas are allowed, the first number written with a
    /// point or a comma fixes the file's separator; a later number with the
    /// other one is refused, so that `9,000` in a file of decimal points
    /// (a thousands separator) is never read as 9.
    pub fn number(&self, row: &Row, col: usize) -> Result<f64> {
        let text = row.field(col);
        if self.decimal_comma() {
            let sep = match (text.contains('.'), text.contains(',')) {
                (true, false) => Some('.'),
                (false, true) => Some(','),
                _ => None,
            };
            if let Some(sep) = sep {
                match self.decimal.get() {
                    None => self.decimal.set(Some((sep, row.line))),
                    Some((seen, line)) if seen != sep => {
                        return Err(self.error(
                            row.line,
                            format!(
                                "\"{}\" (column {}) is written with a decimal {}, but line {line} \
                                 used a decimal {}: a file uses one decimal separator (no \
                                 thousands separators)",
                                excerpt(text.trim()),
                                self.column_name(col),
                                if sep == ',' { "comma" } else { "point" },
                                if seen == ',' { "comma" } else { "point" },
                            ),
                        ));
                    }
                    Some(_) => {}
                }
            }
        }
        parse_finite(
            &self.path,
            row.line,
            text,
            self.column_name(col),
            self.decimal_comma(),
        )
    }

    /// Field `col` of `row` as a number (see [`Self::number`]) times
    /// `factor`, the conversion from the column's unit; fails when the
    /// product leaves the range of double precision, naming value and
    /// column.
    pub fn converted(&self, row: &Row, col: usize, factor: f64) -> Result<f64> {
        let value = self.number(row, col)? * factor;
        if value.is_finite() {
            return Ok(value);
        }
        Err(self.error(
            row.line,
            format!(
                "value \"{}\" (column {}) is out of the range of double precision \
                 once converted from the column's unit",
                excerpt(row.field(col)),
                self.column_name(col)
            ),
        ))
    }

    /// Whether a comma in a number is a decimal comma: when the delimiter
    /// is not a comma (common practice in locales that write `1,5`).
    pub fn decimal_comma(&self) -> bool {
        self.delimiter != ','
    }

    /// An [`Error::Parse`] for this table's file at `line`.
    pub fn error(&self, line: usize, msg: impl Into<String>) -> Error {
        Error::Parse {
            path: self.path.clone(),
            line,
            msg: msg.into(),
        }
    }
}

/// `text` for quoting in a message: whole when short, else its first 40
/// characters, an ellipsis and the length, so a 1 MB field cannot flood the
/// terminal.
pub fn excerpt(text: &str) -> String {
    const KEEP: usize = 40;
    let n = text.chars().count();
    if n <= 2 * KEEP {
        return text.to_string();
    }
    let head: String = text.chars().take(KEEP).collect();
    format!("{head}... ({n} characters)")
}

/// Why a field is not a number; see [`parse_number`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum NumberError {
    Missing,
    NotFinite,
    /// Both a point and a comma: a thousands separator or a typing error.
    MixedSeparators,
    /// Unreadable; `true` when a decimal comma would have made it a number
    /// (only possible in comma-delimited files, where it is not accepted).
    Unreadable(bool),
}

/// Parses `text` (surrounding spaces ignored) as a finite `f64`; with
/// `decimal_comma`, one comma stands for the decimal point (`1,5e-3`).
fn parse_number(text: &str, decimal_comma: bool) -> std::result::Result<f64, NumberError> {
    let t = text.trim();
    if t.is_empty() {
        return Err(NumberError::Missing);
    }
    let swapped;
    let t = if decimal_comma && t.contains(',') {
        if t.contains('.') {
            return Err(NumberError::MixedSeparators);
        }
        swapped = t.replacen(',', ".", 1);
        swapped.as_str()
    } else {
        t
    };
    match t.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(NumberError::NotFinite),
        Err(_) => Err(NumberError::Unreadable(
            !decimal_comma && t.contains(',') && t.replacen(',', ".", 1).parse::<f64>().is_ok(),
        )),
    }
}

/// Parses `text` (surrounding spaces ignored) as a finite `f64`.
///
/// Accepts the usual decimal and exponent forms (`1000`, `-5.2`, `1e3`,
/// `.5`), and with `decimal_comma` a comma for the decimal point (`1,5`),
/// as files delimited by semicolons or tabs write it. Fails with
/// [`Error::Parse`] at `path:line`, naming `column`: `missing value
/// (column c)`, `cannot read "1.2e" as a number (column c)` or `value "inf"
/// is not finite (column c)`; a decimal comma in a comma-delimited file and
/// a number with both separators get a hint.
pub fn parse_finite(
    path: &Path,
    line: usize,
    text: &str,
    column: &str,
    decimal_comma: bool,
) -> Result<f64> {
    let err = |msg: String| Error::Parse {
        path: path.to_path_buf(),
        line,
        msg,
    };
    let shown = excerpt(text.trim());
    parse_number(text, decimal_comma).map_err(|e| match e {
        NumberError::Missing => err(format!("missing value (column {column})")),
        NumberError::NotFinite => err(format!("value \"{shown}\" is not finite (column {column})")),
        NumberError::MixedSeparators => err(format!(
            "cannot read \"{shown}\" as a number (column {column}; write no thousands \
             separator, and a comma or a point as the decimal separator, not both)"
        )),
        NumberError::Unreadable(comma) => {
            let hint = if comma {
                "; in a comma-delimited file use a point as the decimal separator"
            } else {
                ""
            };
            err(format!(
                "cannot read \"{shown}\" as a number (column {column}{hint})"
            ))
        }
    })
}

/// Drops empty fields at the end of a line beyond the first field (a
/// trailing delimiter, as spreadsheets write).
fn trim_trailing_empty(mut fields: Vec<String>) -> Vec<String> {
    while fields.len() > 1 && fields.last().is_some_and(String::is_empty) {
        fields.pop();
    }
    fields
}

/// Splits a column name into its normalised name and its unit, if any.
///
/// The name is trimmed, stripped of surrounding quotes, lower-cased, and
/// inner runs of spaces become one `_`. Typographic primes (`′`, `″`) and
/// the minus sign `−` become `'`, `''` and `-`. A trailing unit in
/// parentheses or brackets, or after a slash, is split off and returned as
/// written: `Freq (Hz)` gives `("freq", Some("Hz"))`, `Z' [Ohm]` gives
/// `("z'", Some("Ohm"))`, `-Z''/Ohm` gives `("-z''", Some("Ohm"))`. A
/// trailing `(Z)` names the quantity, not a unit, and is dropped: `-Im(Z)`
/// gives `("-im", None)`.
pub fn split_unit(raw: &str) -> (String, Option<String>) {
    let mut s = raw.trim();
    if let Some(inner) = s.strip_prefix('"').and_then(|r| r.strip_suffix('"')) {
        s = inner.trim();
    }
    // A name never starts with a prime, so a leading single quote is quoting.
    if let Some(inner) = s.strip_prefix('\'').and_then(|r| r.strip_suffix('\'')) {
        s = inner.trim();
    }
    let mut s: String = s
        .chars()
        .flat_map(|c| match c {
            '\u{2032}' | '\u{2019}' | '\u{2018}' | '\u{00B4}' => vec!['\''],
            '\u{2033}' => vec!['\'', '\''],
            '\u{2212}' | '\u{2013}' => vec!['-'],
            c => vec![c],
        })
        .collect();

    let mut unit = None;
    for _ in 0..2 {
        let Some((rest, inside)) = split_suffix_group(&s) else {
            break;
        };
        if inside.trim().eq_ignore_ascii_case("z") {
            s = rest;
        } else if unit.is_none() {
            unit = Some(inside.trim().to_string());
            s = rest;
        } else {
            break;
        }
    }
    if unit.is_none() {
        if let Some((rest, after)) = s.rsplit_once('/') {
            let after = after.trim();
            let looks_like_unit = !after.is_empty()
                && !rest.trim().is_empty()
                && after
                    .chars()
                    .all(|c| c.is_alphanumeric() || "°·.²*^ ".contains(c));
            if looks_like_unit {
                unit = Some(after.to_string());
                s = rest.to_string();
                // `Re(Z)/Ohm`: the quantity's `(Z)` comes before the slash.
                if let Some((rest, inside)) = split_suffix_group(&s) {
                    if inside.trim().eq_ignore_ascii_case("z") {
                        s = rest;
                    }
                }
            }
        }
    }

    let mut name = s
        .trim()
        .to_lowercase()
        .split_whitespace()
        .collect::<Vec<_>>()
        .join("_");
    if let Some(rest) = name.strip_prefix("-_") {
        name = format!("-{rest}");
    }
    (name, unit.filter(|u| !u.is_empty()))
}

/// The normalised form of a column name, without its unit; see [`split_unit`].
pub fn normalize_name(raw: &str) -> String {
    split_unit(raw).0
}

/// Whether the normalised form of `raw` equals one of `aliases` (lower case).
pub fn name_matches(raw: &str, aliases: &[&str]) -> bool {
    let name = normalize_name(raw);
    aliases.iter().any(|a| *a == name)
}

/// Splits a trailing `( … )` or `[ … ]` group off `s`, returning the text
/// before it and the text inside it.
fn split_suffix_group(s: &str) -> Option<(String, String)> {
    let t = s.trim_end();
    let open = match t.chars().last()? {
        ')' => '(',
        ']' => '[',
        _ => return None,
    };
    let start = t.rfind(open)?;
    let before = &t[..start];
    if before.trim().is_empty() {
        return None;
    }
    let inside = &t[start + 1..t.len() - 1];
    Some((before.to_string(), inside.to_string()))
}

/// Picks the delimiter that occurs most often outside double quotes.
fn detect_delimiter(line: &str) -> char {
    let mut counts = [0usize; DELIMITERS.len()];
    let mut in_quotes = false;
    for c in line.chars() {
        if c == '"' {
            in_quotes = !in_quotes;
        } else if !in_quotes {
            if let Some(i) = DELIMITERS.iter().position(|d| *d == c) {
                counts[i] += 1;
            }
        }
    }
    let mut best = 0;
    for i in 1..DELIMITERS.len() {
        if counts[i] > counts[best] {
            best = i;
        }
    }
    DELIMITERS[best]
}

/// Splits one line into trimmed fields, honouring double quotes.
fn split_fields(line: &str, delimiter: char) -> std::result::Result<Vec<String>, String> {
    let is_space = |c: char| c.is_whitespace() && c != delimiter;
    let mut fields = Vec::new();
    let mut chars = line.chars().peekable();
    loop {
        while chars.peek().is_some_and(|c| is_space(*c)) {
            chars.next();
        }
        let mut field = String::new();
        if chars.peek() == Some(&'"') {
            chars.next();
            loop {
                match chars.next() {
                    None => {
                        return Err(format!(
                            "unterminated quote in field {} (close it with '\"')",
                            fields.len() + 1
                        ));
                    }
                    Some('"') if chars.peek() == Some(&'"') => {
                        chars.next();
                        field.push('"');
                    }
                    Some('"') => break,
                    Some(c) => field.push(c),
                }
            }
            while chars.peek().is_some_and(|c| is_space(*c)) {
                chars.next();
            }
            if chars.peek().is_some_and(|c| *c != delimiter) {
                let rest: String = chars.take_while(|c| *c != delimiter).collect();
                return Err(format!(
                    "unexpected text \"{}\" after the closing quote of field {}",
                    rest.trim(),
                    fields.len() + 1
                ));
            }
        } else {
            while let Some(c) = chars.next_if(|c| *c != delimiter) {
                field.push(c);
            }
            field.truncate(field.trim_end().len());
        }
        fields.push(field);
        if chars.next().is_none() {
            return Ok(fields);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const EXAMPLE: &str = "frequency_hz,z_re_ohm,z_im_ohm";

    fn read(bytes: &[u8]) -> Result<Table> {
        read_table(bytes, Path::new("cell_a.csv"), EXAMPLE)
    }

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-12 * b.abs()
    }

    fn err_text(bytes: &[u8]) -> String {
        read(bytes)
            .expect_err("input should be rejected")
            .to_string()
    }

    #[test]
    fn reads_bom_crlf_comments_blank_lines_and_spaces() {
        let t = read(
            b"\xEF\xBB\xBF# made by hand\r\n  # indented comment\r\nfrequency_hz; z_re_ohm ;z_im_ohm\r\n\
              # comment\r\n\r\n 1000 ; 10 ; -5 \r\n   \r\n;;\r\n100;11;-6\r\n",
        )
        .unwrap();
        assert_eq!(t.delimiter, ';');
        assert_eq!(t.header, ["frequency_hz", "z_re_ohm", "z_im_ohm"]);
        assert_eq!(t.header_line, 3);
        assert_eq!(t.header_text, "frequency_hz; z_re_ohm ;z_im_ohm");
        assert_eq!(t.rows.len(), 2);
        assert_eq!(t.rows[0].line, 6);
        assert_eq!(t.rows[0].fields, ["1000", "10", "-5"]);
        assert_eq!(t.rows[1].line, 9);
        assert_eq!(t.rows[1].fields, ["100", "11", "-6"]);
        assert_eq!(t.path, Path::new("cell_a.csv"));
    }

    #[test]
    fn detects_comma_and_tab_and_counts_lone_cr_lines() {
        let t = read(b"a,b\n1,2").unwrap();
        assert_eq!(t.delimiter, ',');
        assert_eq!(t.rows[0].fields, ["1", "2"]);
        assert_eq!(t.rows[0].line, 2);

        let t = read(b"a\tb\tc\r\r\t2\t3\r").unwrap();
        assert_eq!(t.delimiter, '\t');
        // The empty first field survives: tabs are not trimmed away.
        assert_eq!(t.rows[0].fields, ["", "2", "3"]);
        assert_eq!(t.rows[0].line, 3);
    }

    #[test]
    fn delimiter_inside_quotes_is_not_counted() {
        let t = read(b"\"Z' (Ohm, real)\";\"x\"\"y\";c\n1;2;3\n").unwrap();
        assert_eq!(t.delimiter, ';');
        assert_eq!(t.header, ["Z' (Ohm, real)", "x\"y", "c"]);
        assert_eq!(t.header_text, "\"Z' (Ohm, real)\";\"x\"\"y\";c");
    }

    #[test]
    fn single_column_header_defaults_to_comma() {
        let t = read(b"time_s voltage_v\n1 2\n").unwrap();
        assert_eq!(t.delimiter, ',');
        assert_eq!(t.header, ["time_s voltage_v"]);
    }

    #[test]
    fn header_only_gives_no_rows() {
        let t = read(b"a,b\n# nothing yet\n").unwrap();
        assert!(t.rows.is_empty());
    }

    #[test]
    fn empty_files_are_rejected_at_line_1() {
        let expected = "cell_a.csv:1: file is empty (expected a header line such as \
                        \"frequency_hz,z_re_ohm,z_im_ohm\")";
        assert_eq!(err_text(b""), expected);
        assert_eq!(err_text(b"\xEF\xBB\xBF"), expected);
        assert_eq!(err_text(b" \r\n\n\t\n"), expected);
        assert_eq!(
            err_text(b"# only a comment\n\n"),
            "cell_a.csv:1: no header line found, only comments and blank lines \
             (expected a header line such as \"frequency_hz,z_re_ohm,z_im_ohm\")"
        );
    }

    #[test]
    fn wrong_field_count_names_the_line() {
        assert_eq!(
            err_text(b"a,b,c\n1,2,3\n\n1,2\n"),
            "cell_a.csv:4: expected 3 fields, found 2"
        );
        assert_eq!(
            err_text(b"a,b,c\n1,2,3,4\n"),
            "cell_a.csv:2: expected 3 fields, found 4"
        );
    }

    #[test]
    fn bad_encoding_and_quotes_are_errors() {
        // Latin-1 lines are read as Windows-1252; UTF-16 is transcoded.
        let t = read(b"a,b\n1,2\n\xB5s,3\n").unwrap();
        assert_eq!(t.rows[1].fields, ["\u{b5}s", "3"]);
        let t = read(b"\xFF\xFEa\x00,\x00b\x00\n\x001\x00,\x002\x00").unwrap();
        assert_eq!(t.header, ["a", "b"]);
        assert_eq!(t.rows[0].fields, ["1", "2"]);
        assert_eq!(
            err_text(b"a,b\n1,\"2\n"),
            "cell_a.csv:2: unterminated quote in field 2 (close it with '\"')"
        );
        assert_eq!(
            err_text(b"a,b\n\"1\" x,2\n"),
            "cell_a.csv:2: unexpected text \"x\" after the closing quote of field 1"
        );
    }

    #[test]
    fn number_parsing_messages() {
        let t = read(b"frequency_hz,z_re_ohm\n1e3, 1.2e \n,inf\n1,2\n2,1,5\n").unwrap_err();
        // The last row has three fields: that is reported before any number.
        assert_eq!(t.to_string(), "cell_a.csv:5: expected 2 fields, found 3");

        let t = read(b"frequency_hz;z_re_ohm\n1e3; 1.2e \n;inf\n\"7\";1,5\n").unwrap();
        let rows = &t.rows;
        assert!(close(t.number(&rows[0], 0).unwrap(), 1000.0));
        assert_eq!(
            t.number(&rows[0], 1).unwrap_err().to_string(),
            "cell_a.csv:2: cannot read \"1.2e\" as a number (column z_re_ohm)"
        );
        assert_eq!(
            t.number(&rows[1], 0).unwrap_err().to_string(),
            "cell_a.csv:3: missing value (column frequency_hz)"
        );
        assert_eq!(
            t.number(&rows[1], 1).unwrap_err().to_string(),
            "cell_a.csv:3: value \"inf\" is not finite (column z_re_ohm)"
        );
        assert!(close(t.number(&rows[2], 0).unwrap(), 7.0));
        // A semicolon file takes a decimal comma, but not after a decimal
        // point on an earlier line (there it would be a thousands separator).
        assert_eq!(
            t.number(&rows[2], 1).unwrap_err().to_string(),
            "cell_a.csv:4: \"1,5\" (column z_re_ohm) is written with a decimal comma, but \
             line 2 used a decimal point: a file uses one decimal separator (no thousands \
             separators)"
        );
        let t = read(b"a;b\n1,5;2\n-2,5e-3;3\n").unwrap();
        assert!(close(t.number(&t.rows[0], 0).unwrap(), 1.5));
        assert!(close(t.number(&t.rows[1], 0).unwrap(), -2.5e-3));
        // A tab file of decimal points with a thousands separator.
        let t = read(b"f\tre\n9,000\t10.5\n").unwrap();
        assert!(t.number(&t.rows[0], 0).is_ok());
        assert!(t.number(&t.rows[0], 1).is_err());
        let p = Path::new("x.csv");
        assert_eq!(
            parse_finite(p, 4, "1,5", "c", false)
                .unwrap_err()
                .to_string(),
            "x.csv:4: cannot read \"1,5\" as a number \
             (column c; in a comma-delimited file use a point as the decimal separator)"
        );
        assert_eq!(
            parse_finite(p, 4, "1.234,5", "c", true)
                .unwrap_err()
                .to_string(),
            "x.csv:4: cannot read \"1.234,5\" as a number (column c; write no thousands \
             separator, and a comma or a point as the decimal separator, not both)"
        );
        assert!(close(
            parse_finite(p, 4, "-2,5E-3", "c", true).unwrap(),
            -2.5e-3
        ));
        assert_eq!(
            parse_finite(p, 9, "NaN", "c", false)
                .unwrap_err()
                .to_string(),
            "x.csv:9: value \"NaN\" is not finite (column c)"
        );
        assert_eq!(
            parse_finite(p, 9, "1e400", "c", false)
                .unwrap_err()
                .to_string(),
            "x.csv:9: value \"1e400\" is not finite (column c)"
        );
        assert!(close(
            parse_finite(p, 9, " -.5E+1 ", "c", false).unwrap(),
            -5.0
        ));
    }

    #[test]
    fn header_names_are_normalised() {
        assert_eq!(split_unit("Freq (Hz)"), ("freq".into(), Some("Hz".into())));
        assert_eq!(split_unit(" Z' [Ohm] "), ("z'".into(), Some("Ohm".into())));
        assert_eq!(split_unit("\"-Z''\""), ("-z''".into(), None));
        assert_eq!(split_unit("-Z''/Ohm"), ("-z''".into(), Some("Ohm".into())));
        assert_eq!(split_unit("−Z″ (Ω)"), ("-z''".into(), Some("Ω".into())));
        assert_eq!(split_unit("Re(Z) (Ohm)"), ("re".into(), Some("Ohm".into())));
        assert_eq!(split_unit("-Im(Z)"), ("-im".into(), None));
        assert_eq!(split_unit("Re(Z)/Ohm"), ("re".into(), Some("Ohm".into())));
        assert_eq!(split_unit("f/Hz"), ("f".into(), Some("Hz".into())));
        assert_eq!(split_unit("φ/°"), ("φ".into(), Some("°".into())));
        assert_eq!(split_unit("'freq'"), ("freq".into(), None));
        assert_eq!(split_unit("Phase  Deg"), ("phase_deg".into(), None));
        assert_eq!(split_unit("- Z''"), ("-z''".into(), None));
        assert_eq!(split_unit("|Z|"), ("|z|".into(), None));
        assert_eq!(split_unit("(Hz)"), ("(hz)".into(), None));
        assert_eq!(normalize_name("FREQUENCY_HZ"), "frequency_hz");
        assert!(name_matches("Freq (Hz)", &["f", "freq"]));
        assert!(!name_matches("frequency", &["f", "freq"]));
    }

    #[test]
    fn find_columns_matches_aliases_in_any_position() {
        let t = read(b"x,Freq (Hz),f\n1,2,3\n").unwrap();
        assert_eq!(t.find_columns(&["f", "freq"]), [1, 2]);
        assert_eq!(t.column_name(1), "Freq (Hz)");
        assert_eq!(t.column_name(7), "");
    }

    /// A pipe may deliver one byte at a time: the byte-order mark and the
    /// UTF-16 sniffing still see the first four bytes, and a CR LF split
    /// between two reads is one line end.
    #[test]
    fn byte_at_a_time_input_is_read_like_a_file() {
        let text = "f,re,im\r\n1,2,3\r\n4,5,6\r\n";
        let utf16: Vec<u8> = [0xFF, 0xFE]
            .into_iter()
            .chain(text.encode_utf16().flat_map(u16::to_le_bytes))
            .collect();
        let bom8: Vec<u8> = b"\xEF\xBB\xBF"
            .iter()
            .chain(text.as_bytes())
            .copied()
            .collect();
        for bytes in [utf16, bom8, text.as_bytes().to_vec()] {
            let slow = std::io::BufReader::with_capacity(1, &bytes[..]);
            let t = read_table(slow, Path::new("cell_a.csv"), EXAMPLE).unwrap();
            assert_eq!(t.header, ["f", "re", "im"]);
            assert_eq!(t.rows.len(), 2);
            assert_eq!(t.rows[1].fields, ["4", "5", "6"]);
            assert_eq!(t.rows[1].line, 3);
        }
    }
}
