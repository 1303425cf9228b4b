//! Line-aware reader for small delimited text tables.
//!
//! Every input format of taumap (impedance spectra, step transients) is a
//! header line followed by rows of numbers. This module reads such a file
//! into a [`Table`] that remembers, for every row, the physical line it came
//! from, so that later checks can point at `FILE:LINE`.
//!
//! Accepted layout:
//!
//! - UTF-8 text, optionally starting with a byte-order mark; any other
//!   encoding is rejected with the line and byte where decoding failed;
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
//! - every data row has exactly as many fields as the header.

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

/// Physical lines pulled from a reader, numbered from 1: ends `\n`, `\r\n`
/// or a lone `\r`; a leading byte-order mark is dropped.
#[derive(Debug, Default)]
struct LineSource {
    line: usize,
    started: bool,
    chunk: Vec<u8>,
    pending: std::collections::VecDeque<Vec<u8>>,
}

impl LineSource {
    fn next<R: BufRead>(&mut self, reader: &mut R, path: &Path) -> Result<Option<(usize, String)>> {
        if self.pending.is_empty() {
            self.chunk.clear();
            let n = reader
                .read_until(b'\n', &mut self.chunk)
                .map_err(|source| Error::Io {
                    path: path.to_path_buf(),
                    source,
                })?;
            if n == 0 {
                return Ok(None);
            }
            let mut body: &[u8] = &self.chunk;
            if !self.started {
                self.started = true;
                if body.starts_with(&[0xFF, 0xFE]) || body.starts_with(&[0xFE, 0xFF]) {
                    return Err(Error::Parse {
                        path: path.to_path_buf(),
                        line: 1,
                        msg: "file is encoded as UTF-16 (save it as UTF-8)".into(),
                    });
                }
                body = body.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(body);
                if body.is_empty() {
                    return Ok(None);
                }
            }
            let body = body.strip_suffix(b"\n").unwrap_or(body);
            let body = body.strip_suffix(b"\r").unwrap_or(body);
            // Whatever carriage returns remain are lone-CR line ends.
            self.pending
                .extend(body.split(|b| *b == b'\r').map(<[u8]>::to_vec));
        }
        let Some(raw) = self.pending.pop_front() else {
            return Ok(None);
        };
        self.line += 1;
        let line_no = self.line;
        match String::from_utf8(raw) {
            Ok(text) => Ok(Some((line_no, text))),
            Err(e) => {
                let at = e.utf8_error().valid_up_to();
                let byte = e.as_bytes().get(at).copied().unwrap_or(0);
                Err(Error::Parse {
                    path: path.to_path_buf(),
                    line: line_no,
                    msg: format!(
                        "line is not valid UTF-8 (byte 0x{byte:02X} at column {}; save the file as UTF-8)",
                        at + 1
                    ),
                })
            }
        }
    }
}

impl<R: BufRead> TableReader<R> {
    /// Reads up to and including the header line.
    ///
    /// Fails as [`read_table`] does for an empty file, a file without a
    /// header, bad encoding or an unterminated quote in the header.
    pub fn new(mut reader: R, path: &Path, example_header: &str) -> Result<Self> {
        let mut lines = LineSource::default();
        let mut saw_comment = false;
        loop {
            let Some((line_no, text)) = lines.next(&mut reader, path)? else {
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
            let delimiter = detect_delimiter(&text);
            let header = split_fields(&text, delimiter).map_err(|msg| Error::Parse {
                path: path.to_path_buf(),
                line: line_no,
                msg,
            })?;
            return Ok(Self {
                reader,
                head: TableHead {
                    path: path.to_path_buf(),
                    delimiter,
                    header,
                    header_text: trimmed.to_string(),
                    header_line: line_no,
                },
                lines,
            });
        }
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
    ///
    /// A field missing from `row` reads as an empty field.
    pub fn number(&self, row: &Row, col: usize) -> Result<f64> {
        parse_finite(&self.path, row.line, row.field(col), self.column_name(col))
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

/// Parses `text` (surrounding spaces ignored) as a finite `f64`.
///
/// Accepts the usual decimal and exponent forms (`1000`, `-5.2`, `1e3`,
/// `.5`). Fails with [`Error::Parse`] at `path:line`, naming `column`:
/// `missing value (column c)`, `cannot read "1.2e" as a number (column c)`
/// or `value "inf" is not finite (column c)`; a decimal comma gets a hint.
pub fn parse_finite(path: &Path, line: usize, text: &str, column: &str) -> Result<f64> {
    let err = |msg: String| Error::Parse {
        path: path.to_path_buf(),
        line,
        msg,
    };
    let t = text.trim();
    if t.is_empty() {
        return Err(err(format!("missing value (column {column})")));
    }
    let shown = excerpt(t);
    match t.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(err(format!(
            "value \"{shown}\" is not finite (column {column})"
        ))),
        Err(_) => {
            let decimal_comma = t.contains(',') && t.replacen(',', ".", 1).parse::<f64>().is_ok();
            let hint = if decimal_comma {
                "; use a point as the decimal separator"
            } else {
                ""
            };
            Err(err(format!(
                "cannot read \"{shown}\" as a number (column {column}{hint})"
            )))
        }
    }
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
        assert_eq!(
            err_text(b"a,b\n1,2\n\xB5s,3\n"),
            "cell_a.csv:3: line is not valid UTF-8 (byte 0xB5 at column 1; save the file as UTF-8)"
        );
        assert_eq!(
            err_text(b"\xFF\xFEa\x00"),
            "cell_a.csv:1: file is encoded as UTF-16 (save it as UTF-8)"
        );
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
        assert_eq!(
            t.number(&rows[2], 1).unwrap_err().to_string(),
            "cell_a.csv:4: cannot read \"1,5\" as a number \
             (column z_re_ohm; use a point as the decimal separator)"
        );
        let p = Path::new("x.csv");
        assert_eq!(
            parse_finite(p, 9, "NaN", "c").unwrap_err().to_string(),
            "x.csv:9: value \"NaN\" is not finite (column c)"
        );
        assert_eq!(
            parse_finite(p, 9, "1e400", "c").unwrap_err().to_string(),
            "x.csv:9: value \"1e400\" is not finite (column c)"
        );
        assert!(close(parse_finite(p, 9, " -.5E+1 ", "c").unwrap(), -5.0));
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
}
