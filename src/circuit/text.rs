//! The model text format: an equivalent circuit as a few lines of text,
//! one element per line, all elements in series in the order written.
//!
//! ```text
//! # taumap model: one element per line, all in series, in the order written.
//! # '#' starts a comment anywhere on a line; blank lines are ignored.
//! #   KIND [LABEL] NAME=VALUE[UNIT] [fixed] NAME=VALUE[UNIT] ...
//! resistor  r_inf    r=150mohm
//! inductor  leads    l=80nH
//! zarc      anode    r=80mohm  tau=20us  phi=0.85
//! zarc      cathode  r=0.12ohm tau=1ms   phi=0.95 fixed
//! warburg-transmissive diffusion r=50mohm tau=0.5s
//! ```
//!
//! # Rules
//! - Tokens are separated by white space (spaces or tabs; any number).
//! - `KIND` is the keyword of a [`Kind`] ([`Kind::name`]): `resistor`,
//!   `inductor`, `capacitor`, `voigt`, `zarc`, `havriliak-negami`,
//!   `warburg-transmissive`, `warburg-reflective`, `gerischer`.
//! - `LABEL` (optional) is the second token when it holds no `=`: letters,
//!   digits, `_`, `-` and `.`, unique in the file (the word `fixed` is not
//!   a label). An element without one is labelled by its kind keyword and
//!   a running number among the unlabelled elements of that kind (`zarc1`,
//!   `zarc2`, ...), skipping any label the file already uses.
//! - Each parameter of the kind ([`Kind::params`]: `r`, `l`, `c`, `tau`,
//!   `phi`, `alpha`, `beta`) is given exactly once as `NAME=VALUE`, in any
//!   order, with no space around `=`.
//! - `VALUE` is a decimal number (`0.15`, `150`, `1.5e-1`) followed at once
//!   by its unit. Resistances, inductances, capacitances and times need a
//!   unit; exponents (`phi`, `alpha`, `beta`) take none. The units are
//!   `ohm` (also written `Ohm` or `Ω`), `H`, `F` and `s`, each with at most
//!   one SI prefix before it: `p`, `n`, `u` (or `µ`), `m`, `k`, `M`, `G`.
//!   The letters of the unit may be in either case, but the prefix is read
//!   as written: `m` is milli and `M` is mega, so `mOhm` and `mohm` are
//!   milli-ohm and `MOhm` is mega-ohm.
//! - Values are positive and finite; exponents lie in (0, 1].
//! - The word `fixed` right after a parameter marks that parameter as held
//!   fixed by a fit.
//!
//! Every fault is an [`Error::Parse`] naming the file, the line and, where
//! one is at fault, the element (kind and label) and the parameter. A file
//! larger than [`MAX_MODEL_BYTES`] is refused before it is read to the end.
//!
//! The writer ([`Model::to_text`]) puts each value with the SI prefix that
//! brings its mantissa into [1, 1000) and six significant digits
//! (`r=80.1234mohm`, `tau=20.0000us`; exponents plain, `phi=0.850000`),
//! in aligned columns; its text reads back to the same model up to half a
//! unit in the sixth digit.

use super::element::{Element, Kind, Quantity, Series};
use crate::error::{Error, Result};
use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::io::Read as _;
use std::path::Path;

/// The largest model file read (1 MiB); a model is a few lines of text.
pub const MAX_MODEL_BYTES: u64 = 1 << 20;

/// One element of a model with its label and which of its parameters a fit
/// holds fixed.
#[derive(Clone, Debug, PartialEq)]
pub struct ModelElement {
    /// The element's name in the model, unique within it (letters, digits,
    /// `_`, `-`, `.`).
    pub label: String,
    /// The element and its values (SI units).
    pub element: Element,
    /// Per parameter, in the order of [`Kind::params`]: whether a fit holds
    /// it at its value.
    pub fixed: Vec<bool>,
}

/// An equivalent circuit: elements in series, in the order of the text.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Model {
    /// The elements, in the order written.
    pub elements: Vec<ModelElement>,
}

impl Model {
    /// The model of `elements` in that order, none of their parameters
    /// fixed, labelled as the reader labels elements written without one
    /// (`resistor1`, `zarc1`, `zarc2`, ...).
    pub fn from_series(series: &Series) -> Model {
        let mut labels: Vec<Option<String>> = vec![None; series.0.len()];
        let kinds: Vec<Kind> = series.0.iter().map(Element::kind).collect();
        assign_labels(&kinds, &mut labels);
        Model {
            elements: series
                .0
                .iter()
                .zip(labels)
                .map(|(e, label)| ModelElement {
                    label: label.expect("assign_labels labels every element"),
                    element: *e,
                    fixed: vec![false; e.kind().params().len()],
                })
                .collect(),
        }
    }

    /// Reads the model text of `text`; `path` only names the file in errors.
    ///
    /// Fails with [`Error::Parse`] (file, 1-based line, what is wrong) on
    /// any fault of the format described in the [module documentation](self),
    /// and when the text holds no element.
    pub fn parse(text: &str, path: &Path) -> Result<Model> {
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        let err = |line: usize, msg: String| Error::Parse {
            path: path.to_path_buf(),
            line,
            msg,
        };
        let mut lines_read = 0;
        let mut parsed: Vec<ParsedLine> = Vec::new();
        let mut label_lines: BTreeMap<String, usize> = BTreeMap::new();
        for (i, raw) in text.lines().enumerate() {
            let line = i + 1;
            lines_read = line;
            let content = raw.split('#').next().unwrap_or("");
            if content.trim().is_empty() {
                continue;
            }
            let p = parse_line(content).map_err(|m| err(line, m))?;
            if let Some(label) = &p.label {
                if let Some(first) = label_lines.get(label) {
                    return Err(err(
                        line,
                        format!(
                            "{}: duplicate label \"{label}\" (also on line {first}; labels must \
                             be unique)",
                            p.kind.name()
                        ),
                    ));
                }
                label_lines.insert(label.clone(), line);
            }
            parsed.push(p);
        }
        if parsed.is_empty() {
            return Err(err(
                lines_read.max(1),
                "no element in the model file (write one element per line, e.g. \"zarc anode \
                 r=80mohm tau=20us phi=0.85\")"
                    .into(),
            ));
        }
        let kinds: Vec<Kind> = parsed.iter().map(|p| p.kind).collect();
        let mut labels: Vec<Option<String>> = parsed.iter().map(|p| p.label.clone()).collect();
        assign_labels(&kinds, &mut labels);
        Ok(Model {
            elements: parsed
                .into_iter()
                .zip(labels)
                .map(|(p, label)| ModelElement {
                    label: label.expect("assign_labels labels every element"),
                    element: p.kind.element(&p.values),
                    fixed: p.fixed,
                })
                .collect(),
        })
    }

    /// Reads the model file at `path` (see [`Model::parse`]).
    ///
    /// Fails with [`Error::Io`] when the file cannot be read, and with
    /// [`Error::Parse`] when it is larger than [`MAX_MODEL_BYTES`] (refused
    /// after reading that much, at the line reached), is not UTF-8 text (at
    /// the line of the first bad byte) or does not parse.
    pub fn read(path: &Path) -> Result<Model> {
        let io_err = |source| Error::Io {
            path: path.to_path_buf(),
            source,
        };
        let file = std::fs::File::open(path).map_err(io_err)?;
        let mut bytes = Vec::new();
        file.take(MAX_MODEL_BYTES + 1)
            .read_to_end(&mut bytes)
            .map_err(io_err)?;
        Model::parse_bytes(&bytes, path)
    }

    /// [`Model::parse`] of raw bytes, with the size and encoding checks of
    /// [`Model::read`].
    fn parse_bytes(bytes: &[u8], path: &Path) -> Result<Model> {
        let line_at = |end: usize| 1 + bytes[..end].iter().filter(|&&b| b == b'\n').count();
        if bytes.len() as u64 > MAX_MODEL_BYTES {
            return Err(Error::Parse {
                path: path.to_path_buf(),
                line: line_at(MAX_MODEL_BYTES as usize),
                msg: format!(
                    "the model file is larger than 1 MiB ({MAX_MODEL_BYTES} bytes); a model is a \
                     few lines of text"
                ),
            });
        }
        match std::str::from_utf8(bytes) {
            Ok(text) => Model::parse(text, path),
            Err(e) => {
                let at = e.valid_up_to();
                Err(Error::Parse {
                    path: path.to_path_buf(),
                    line: line_at(at),
                    msg: format!(
                        "byte 0x{:02x} is not UTF-8 text (save the model as UTF-8 text)",
                        bytes[at]
                    ),
                })
            }
        }
    }

    /// The elements in series, for their impedance and step response.
    pub fn series(&self) -> Series {
        Series(self.elements.iter().map(|e| e.element).collect())
    }

    /// The model as text that [`Model::parse`] reads back: one aligned line
    /// per element, `fixed` kept, values as described in the
    /// [module documentation](self). A model without elements gives an
    /// empty text, which the reader refuses.
    pub fn to_text(&self) -> String {
        self.to_text_annotated(&[], None)
    }

    /// [`Model::to_text`] with `header` on top, each of its lines as a
    /// `# ` comment, and, with `se`, each element's standard errors (one
    /// entry per parameter in the order of [`Kind::params`]; `None` for a
    /// parameter fixed or not estimated) as a trailing comment on its line,
    /// `# se r=0.31mohm tau=1.2us phi=0.0021`: two significant digits, in
    /// the unit and prefix of the value. Elements beyond the length of
    /// `se`, and elements whose entries are all `None`, get no comment.
    pub fn to_text_annotated(&self, header: &[String], se: Option<&[Vec<Option<f64>>]>) -> String {
        let mut out = String::new();
        for h in header {
            for l in h.lines() {
                if l.is_empty() {
                    out.push_str("#\n");
                } else {
                    let _ = writeln!(out, "# {l}");
                }
            }
        }
        let rows: Vec<Vec<String>> = self.elements.iter().map(element_cells).collect();
        let notes: Vec<Option<String>> = self
            .elements
            .iter()
            .enumerate()
            .map(|(i, e)| se.and_then(|s| s.get(i)).and_then(|s| se_note(e, s)))
            .collect();
        let columns = rows.iter().map(Vec::len).max().unwrap_or(0);
        let widths: Vec<usize> = (0..columns)
            .map(|c| {
                rows.iter()
                    .filter_map(|r| r.get(c))
                    .map(|s| s.chars().count())
                    .max()
                    .unwrap_or(0)
            })
            .collect();
        let lines: Vec<String> = rows
            .iter()
            .map(|cells| {
                let mut line = String::new();
                for (c, cell) in cells.iter().enumerate() {
                    line.push_str(cell);
                    if c + 1 < cells.len() {
                        pad(&mut line, widths[c] - cell.chars().count() + 2);
                    }
                }
                line
            })
            .collect();
        let note_column = lines
            .iter()
            .zip(&notes)
            .filter(|(_, n)| n.is_some())
            .map(|(l, _)| l.chars().count())
            .max()
            .unwrap_or(0);
        for (line, note) in lines.iter().zip(&notes) {
            out.push_str(line);
            if let Some(n) = note {
                pad(&mut out, note_column - line.chars().count() + 2);
                let _ = write!(out, "# se {n}");
            }
            out.push('\n');
        }
        out
    }
}

/// Appends `n` spaces.
fn pad(s: &mut String, n: usize) {
    s.extend(std::iter::repeat_n(' ', n));
}

/// The cells of an element's line: kind, label, then `name=value[ fixed]`.
fn element_cells(e: &ModelElement) -> Vec<String> {
    let kind = e.element.kind();
    let mut cells = vec![kind.name().to_string(), e.label.clone()];
    for (i, (spec, v)) in kind.params().iter().zip(e.element.params()).enumerate() {
        let mut cell = format!("{}={}", spec.name, format_value(v, spec.quantity));
        if e.fixed.get(i).copied().unwrap_or(false) {
            cell.push_str(" fixed");
        }
        cells.push(cell);
    }
    cells
}

/// `r=0.31mohm tau=1.2us` for the standard errors `se` of `e`; `None`
/// when none is given.
fn se_note(e: &ModelElement, se: &[Option<f64>]) -> Option<String> {
    let kind = e.element.kind();
    let parts: Vec<String> = kind
        .params()
        .iter()
        .zip(e.element.params())
        .zip(se)
        .filter_map(|((spec, v), s)| {
            s.map(|s| {
                let (exp, prefix) = value_prefix(v, spec.quantity);
                let scaled = s / 10f64.powi(exp);
                format!(
                    "{}={}{prefix}{}",
                    spec.name,
                    two_digits(scaled),
                    spec.quantity.unit()
                )
            })
        })
        .collect();
    (!parts.is_empty()).then(|| parts.join(" "))
}

/// `x` with two significant digits in plain notation (`0.31`, `1.2`, `35`,
/// `350`), in exponent notation beyond 1e-4..1e6 or when not finite.
fn two_digits(x: f64) -> String {
    if !x.is_finite() || x == 0.0 {
        return format!("{x}");
    }
    let a = x.abs();
    if !(1e-4..1e6).contains(&a) {
        return format!("{x:.1e}");
    }
    // Round to two digits first, so 9.96 prints as 10, not 9.96 -> "10.0".
    let rounded: f64 = format!("{x:.1e}").parse().unwrap_or(x);
    let exp = rounded.abs().log10().floor() as i32;
    let decimals = (1 - exp).max(0) as usize;
    format!("{rounded:.decimals$}")
}

/// SI prefixes of the format, by power of ten.
const PREFIXES: [(i32, &str); 8] = [
    (-12, "p"),
    (-9, "n"),
    (-6, "u"),
    (-3, "m"),
    (0, ""),
    (3, "k"),
    (6, "M"),
    (9, "G"),
];

/// `v` rounded to six significant digits, and its decimal exponent.
fn round6(v: f64) -> (f64, i32) {
    let s = format!("{v:.5e}");
    let exp = s
        .split_once('e')
        .and_then(|(_, e)| e.parse::<i32>().ok())
        .unwrap_or(0);
    (s.parse().unwrap_or(v), exp)
}

/// The power of ten and prefix the writer uses for `v`: the one that brings
/// the mantissa (after rounding to six digits) into [1, 1000); none
/// (`(0, "")`) for exponents and for values beyond the prefixes' range.
fn value_prefix(v: f64, q: Quantity) -> (i32, &'static str) {
    if q == Quantity::Exponent || !v.is_finite() || v <= 0.0 {
        return (0, "");
    }
    let (_, exp) = round6(v);
    let p = exp.div_euclid(3) * 3;
    PREFIXES
        .iter()
        .find(|(e, _)| *e == p)
        .copied()
        .unwrap_or((0, ""))
}

/// A value as the writer puts it: six significant digits, with the SI
/// prefix of [`value_prefix`] and the unit; exponents plain. Values
/// outside the prefixes' range (below 1 p, from 1000 G) are written in
/// exponent notation in the base unit (`1.00000e-15F`).
fn format_value(v: f64, q: Quantity) -> String {
    let (rounded, exp) = round6(v);
    if q == Quantity::Exponent {
        if !(-6..=0).contains(&exp) {
            return format!("{v:.5e}");
        }
        let decimals = (5 - exp) as usize;
        return format!("{rounded:.decimals$}");
    }
    let (p, prefix) = value_prefix(v, q);
    let unit = q.unit();
    if !(-12..12).contains(&exp) {
        return format!("{v:.5e}{unit}");
    }
    let mantissa = rounded / 10f64.powi(p);
    let decimals = (5 - (exp - p)).max(0) as usize;
    format!("{mantissa:.decimals$}{prefix}{unit}")
}

/// One element line as read, before labels are assigned.
struct ParsedLine {
    kind: Kind,
    label: Option<String>,
    values: Vec<f64>,
    fixed: Vec<bool>,
}

/// Labels every element of `labels` that has none: its kind keyword and a
/// running number among the unlabelled elements of its kind, skipping
/// labels already in use.
fn assign_labels(kinds: &[Kind], labels: &mut [Option<String>]) {
    let mut used: std::collections::BTreeSet<String> = labels.iter().flatten().cloned().collect();
    let mut next: BTreeMap<Kind, usize> = BTreeMap::new();
    for (kind, label) in kinds.iter().zip(labels.iter_mut()) {
        if label.is_some() {
            continue;
        }
        let n = next.entry(*kind).or_insert(0);
        let name = loop {
            *n += 1;
            let candidate = format!("{}{}", kind.name(), n);
            if !used.contains(&candidate) {
                break candidate;
            }
        };
        used.insert(name.clone());
        *label = Some(name);
    }
}

/// The kinds as the error messages list them.
fn kind_list() -> String {
    Kind::ALL.map(Kind::name).join(", ")
}

/// `zarc takes r, tau, phi`.
fn takes(kind: Kind) -> String {
    let names: Vec<&str> = kind.params().iter().map(|p| p.name).collect();
    format!("{} takes {}", kind.name(), names.join(", "))
}

/// Whether `s` is a valid label.
fn valid_label(s: &str) -> bool {
    s.chars()
        .all(|c| c.is_alphabetic() || c.is_ascii_digit() || matches!(c, '_' | '-' | '.'))
}

/// Reads the element of one line (comment removed, not blank); the error
/// is the message without file and line.
fn parse_line(content: &str) -> std::result::Result<ParsedLine, String> {
    let mut tokens = content.split_whitespace().peekable();
    let kind_word = tokens.next().unwrap_or("");
    let kind = Kind::from_name(kind_word).ok_or_else(|| {
        let hint = if Kind::from_name(&kind_word.to_lowercase()).is_some() {
            "; keywords are written in lower case"
        } else {
            ""
        };
        format!(
            "unknown element kind \"{kind_word}\" (kinds: {}{hint})",
            kind_list()
        )
    })?;
    let mut label = None;
    if let Some(&t) = tokens.peek()
        && !t.contains('=')
        && t != "fixed"
    {
        if !valid_label(t) {
            return Err(format!(
                "{}: label \"{t}\" may hold only letters, digits, '_', '-' and '.'",
                kind.name()
            ));
        }
        label = Some(t.to_string());
        tokens.next();
    }
    let who = match &label {
        Some(l) => format!("{} \"{l}\"", kind.name()),
        None => kind.name().to_string(),
    };
    let specs = kind.params();
    let mut values: Vec<Option<f64>> = vec![None; specs.len()];
    let mut fixed = vec![false; specs.len()];
    let mut last: Option<usize> = None;
    for t in tokens {
        if t == "fixed" {
            match last.take() {
                Some(i) => fixed[i] = true,
                None => {
                    return Err(format!(
                        "{who}: \"fixed\" must follow a parameter (as in phi=0.95 fixed)"
                    ));
                }
            }
            continue;
        }
        let Some((name, value)) = t
            .split_once('=')
            .filter(|(n, v)| !n.is_empty() && !v.is_empty())
        else {
            let hint = if specs.iter().any(|s| s.name == t) || t.contains('=') {
                "write no space around '='"
            } else {
                "a label goes right after the kind"
            };
            return Err(format!(
                "{who}: expected NAME=VALUE or \"fixed\", found \"{t}\" ({}; {hint})",
                takes(kind)
            ));
        };
        let Some(i) = specs.iter().position(|s| s.name == name) else {
            return Err(format!(
                "{who}: unknown parameter \"{name}\" ({})",
                takes(kind)
            ));
        };
        if values[i].is_some() {
            return Err(format!("{who}: parameter \"{name}\" is given twice"));
        }
        values[i] = Some(parse_value(&who, name, value, specs[i].quantity)?);
        last = Some(i);
    }
    let missing: Vec<String> = specs
        .iter()
        .zip(&values)
        .filter(|(_, v)| v.is_none())
        .map(|(s, _)| format!("\"{}\"", s.name))
        .collect();
    if !missing.is_empty() {
        let noun = if missing.len() == 1 {
            "parameter"
        } else {
            "parameters"
        };
        return Err(format!(
            "{who}: missing {noun} {} ({})",
            missing.join(", "),
            takes(kind)
        ));
    }
    Ok(ParsedLine {
        kind,
        label,
        values: values.into_iter().flatten().collect(),
        fixed,
    })
}

/// A value of parameter `name` as the messages show it (`r=80mohm`).
fn example(name: &str, q: Quantity) -> String {
    let value = match q {
        Quantity::Resistance => "80mohm",
        Quantity::Inductance => "80nH",
        Quantity::Capacitance => "2mF",
        Quantity::Time => "20us",
        Quantity::Exponent => "0.85",
    };
    format!("{name}={value}")
}

/// What parameter `name` of quantity `q` is and how it is written, for
/// the messages.
fn unit_help(name: &str, q: Quantity) -> String {
    let (what, units) = match q {
        Quantity::Resistance => ("a resistance", "ohm, Ohm or \u{3a9}"),
        Quantity::Inductance => ("an inductance", "H"),
        Quantity::Capacitance => ("a capacitance", "F"),
        Quantity::Time => ("a time", "s"),
        Quantity::Exponent => {
            return format!("{name} is an exponent in (0, 1], written without a unit");
        }
    };
    format!(
        "{name} is {what}: {units} right after the number, with an optional prefix p, n, u, \
         \u{b5}, m, k, M or G, as in {}",
        example(name, q)
    )
}

/// Splits `s` into its leading number text and the rest (the unit).
fn split_number(s: &str) -> (&str, &str) {
    let b = s.as_bytes();
    let mut i = 0;
    while i < b.len() {
        let c = b[i];
        let exponent_mark = matches!(c, b'e' | b'E')
            && i > 0
            && b.get(i + 1)
                .is_some_and(|n| n.is_ascii_digit() || matches!(n, b'+' | b'-'));
        if !(c.is_ascii_digit() || matches!(c, b'.' | b'+' | b'-') || exponent_mark) {
            break;
        }
        i += 1;
    }
    s.split_at(i)
}

/// The power of ten of `unit` for quantity `q`, or `None` when `unit` is
/// not one of the accepted spellings.
fn unit_exponent(unit: &str, q: Quantity) -> Option<i32> {
    let base = |s: &str| match q {
        Quantity::Resistance => s.eq_ignore_ascii_case("ohm") || s == "\u{3a9}" || s == "\u{2126}",
        Quantity::Inductance => s.eq_ignore_ascii_case("h"),
        Quantity::Capacitance => s.eq_ignore_ascii_case("f"),
        Quantity::Time => s.eq_ignore_ascii_case("s"),
        Quantity::Exponent => false,
    };
    if base(unit) {
        return Some(0);
    }
    let mut chars = unit.chars();
    let exp = match chars.next()? {
        'p' => -12,
        'n' => -9,
        'u' | '\u{b5}' | '\u{3bc}' => -6,
        'm' => -3,
        'k' => 3,
        'M' => 6,
        'G' => 9,
        _ => return None,
    };
    base(chars.as_str()).then_some(exp)
}

/// The value of `name=text` in SI units, checked for its range.
fn parse_value(who: &str, name: &str, text: &str, q: Quantity) -> std::result::Result<f64, String> {
    let (number, unit) = split_number(text);
    let bad_number = |quoted: &str, hint: &str| {
        format!("{who}: cannot read \"{quoted}\" as a number (parameter {name}; {hint})")
    };
    if let Some(decimals) = unit.strip_prefix(',')
        && decimals.starts_with(|c: char| c.is_ascii_digit())
    {
        let (digits, _) = split_number(decimals);
        return Err(bad_number(
            &format!("{number},{digits}"),
            "use a point as the decimal separator",
        ));
    }
    let quoted = if number.is_empty() { text } else { number };
    let x: f64 = number
        .parse()
        .map_err(|_| bad_number(quoted, &format!("write e.g. {}", example(name, q))))?;
    let exp = if q == Quantity::Exponent {
        if !unit.is_empty() {
            return Err(format!("{who}: {name}={text}: {}", unit_help(name, q)));
        }
        0
    } else if unit.is_empty() {
        return Err(format!(
            "{who}: {name}={text} has no unit ({})",
            unit_help(name, q)
        ));
    } else {
        unit_exponent(unit, q).ok_or_else(|| {
            format!(
                "{who}: unknown unit \"{unit}\" in {name}={text} ({})",
                unit_help(name, q)
            )
        })?
    };
    if !x.is_finite() {
        return Err(format!(
            "{who}: {name}={text} is out of the range of double precision"
        ));
    }
    if x <= 0.0 {
        return Err(if q == Quantity::Exponent {
            format!("{who}: {name} must be in (0, 1], found {text}")
        } else {
            format!("{who}: {name} must be positive, found {text}")
        });
    }
    // Division by an exact power of ten rounds once, as parsing would.
    let v = if exp < 0 {
        x / 10f64.powi(-exp)
    } else {
        x * 10f64.powi(exp)
    };
    if !v.is_normal() {
        return Err(format!(
            "{who}: {name}={text} is out of the range of double precision once converted to {}",
            q.unit()
        ));
    }
    if q == Quantity::Exponent && v > 1.0 {
        return Err(format!("{who}: {name} must be in (0, 1], found {text}"));
    }
    Ok(v)
}

#[cfg(test)]
mod tests {
    use super::*;

    const EXAMPLE: &str = "\
# taumap model: one element per line, all in series, in the order written.
# '#' starts a comment anywhere on a line; blank lines are ignored.
#   KIND [LABEL] NAME=VALUE[UNIT] [fixed] NAME=VALUE[UNIT] ...
resistor  r_inf    r=150mohm
inductor  leads    l=80nH
zarc      anode    r=80mohm  tau=20us  phi=0.85
zarc      cathode  r=0.12ohm tau=1ms   phi=0.95 fixed
warburg-transmissive diffusion r=50mohm tau=0.5s
";

    fn parse(text: &str) -> Result<Model> {
        Model::parse(text, Path::new("cell.model"))
    }

    /// The line and message of a parse error.
    fn fault(text: &str) -> (usize, String) {
        match parse(text) {
            Err(Error::Parse { line, msg, path }) => {
                assert_eq!(path, Path::new("cell.model"));
                (line, msg)
            }
            other => panic!("expected a parse error, got {other:?}"),
        }
    }

    fn close(a: f64, b: f64, rel: f64) -> bool {
        (a - b).abs() <= rel * b.abs()
    }

    #[test]
    fn the_documented_example_parses() {
        let m = parse(EXAMPLE).unwrap();
        let labels: Vec<&str> = m.elements.iter().map(|e| e.label.as_str()).collect();
        assert_eq!(labels, ["r_inf", "leads", "anode", "cathode", "diffusion"]);
        let want = [
            Element::Resistor { r_ohm: 0.150 },
            Element::Inductor { l_h: 80e-9 },
            Element::Zarc {
                r_ohm: 0.080,
                tau_s: 20e-6,
                phi: 0.85,
            },
            Element::Zarc {
                r_ohm: 0.12,
                tau_s: 1e-3,
                phi: 0.95,
            },
            Element::WarburgFinite {
                r_ohm: 0.050,
                tau_s: 0.5,
            },
        ];
        for (e, w) in m.elements.iter().zip(want) {
            assert_eq!(e.element.kind(), w.kind());
            for (a, b) in e.element.params().iter().zip(w.params()) {
                assert!(close(*a, b, 1e-15), "{e:?} vs {w:?}");
            }
        }
        let fixed: Vec<Vec<bool>> = m.elements.iter().map(|e| e.fixed.clone()).collect();
        assert_eq!(
            fixed,
            [
                vec![false],
                vec![false],
                vec![false; 3],
                vec![false, false, true],
                vec![false; 2]
            ]
        );
        assert_eq!(m.series().0.len(), 5);
    }

    #[test]
    fn every_kind_parses_with_parameters_in_any_order() {
        let text = "\
resistor r=1ohm
inductor l=2uH
capacitor c=3mF
voigt tau=4ms r=5ohm
zarc phi=0.7 tau=6s r=7ohm
havriliak-negami beta=0.6 alpha=0.8 tau=9us r=10ohm
warburg-transmissive r=11ohm tau=12s
warburg-reflective tau=13s r=14ohm
gerischer r=15ohm tau=16ms
";
        let m = parse(text).unwrap();
        let got: Vec<(Kind, Vec<f64>)> = m
            .elements
            .iter()
            .map(|e| (e.element.kind(), e.element.params()))
            .collect();
        let want: Vec<(Kind, Vec<f64>)> = vec![
            (Kind::Resistor, vec![1.0]),
            (Kind::Inductor, vec![2e-6]),
            (Kind::Capacitor, vec![3e-3]),
            (Kind::Voigt, vec![5.0, 4e-3]),
            (Kind::Zarc, vec![7.0, 6.0, 0.7]),
            (Kind::HavriliakNegami, vec![10.0, 9e-6, 0.8, 0.6]),
            (Kind::WarburgTransmissive, vec![11.0, 12.0]),
            (Kind::WarburgReflective, vec![14.0, 13.0]),
            (Kind::Gerischer, vec![15.0, 16e-3]),
        ];
        assert_eq!(got.len(), want.len());
        for ((gk, gv), (wk, wv)) in got.iter().zip(&want) {
            assert_eq!(gk, wk);
            assert_eq!(gv.len(), wv.len());
            for (a, b) in gv.iter().zip(wv) {
                assert!(close(*a, *b, 1e-15), "{gk:?}: {gv:?} vs {wv:?}");
            }
        }
        // Automatic labels: kind and a running number.
        assert_eq!(m.elements[4].label, "zarc1");
        assert_eq!(m.elements[5].label, "havriliak-negami1");
    }

    #[test]
    fn units_and_prefixes() {
        let r = |unit: &str| -> f64 {
            let m = parse(&format!("resistor r=5{unit}")).unwrap();
            m.elements[0].element.params()[0]
        };
        // Prefix case is kept: m is milli, M is mega; the base is
        // case-insensitive.
        for (unit, want) in [
            ("ohm", 5.0),
            ("Ohm", 5.0),
            ("OHM", 5.0),
            ("\u{3a9}", 5.0),
            ("\u{2126}", 5.0),
            ("mohm", 5e-3),
            ("mOhm", 5e-3),
            ("m\u{3a9}", 5e-3),
            ("Mohm", 5e6),
            ("MOhm", 5e6),
            ("kohm", 5e3),
            ("Gohm", 5e9),
            ("uohm", 5e-6),
            ("nohm", 5e-9),
            ("pohm", 5e-12),
        ] {
            assert!(close(r(unit), want, 1e-15), "{unit}: {}", r(unit));
        }
        let tau = |value: &str| -> f64 {
            parse(&format!("voigt r=1ohm tau={value}"))
                .unwrap()
                .elements[0]
                .element
                .params()[1]
        };
        for (v, want) in [
            ("3us", 3e-6),
            ("3\u{b5}s", 3e-6),
            ("3\u{3bc}s", 3e-6),
            ("3ms", 3e-3),
            ("3S", 3.0),
            ("3Ms", 3e6),
            ("3e-3s", 3e-3),
            ("1.5E2ms", 0.15),
            (".5ns", 0.5e-9),
        ] {
            assert!(close(tau(v), want, 1e-15), "{v}: {}", tau(v));
        }
        let l = parse("inductor l=80nh").unwrap().elements[0]
            .element
            .params()[0];
        assert!(close(l, 80e-9, 1e-15));
        let c = parse("capacitor c=2.5mF").unwrap().elements[0]
            .element
            .params()[0];
        assert!(close(c, 2.5e-3, 1e-15));
        // Units of another quantity, and prefixes not in the list.
        for bad in [
            "voigt r=1ohm tau=3ohm",
            "voigt r=1s tau=3s",
            "voigt r=1Kohm tau=3s",
            "voigt r=1ohms tau=3s",
            "voigt r=1mmohm tau=3s",
            "inductor l=1uF",
            "capacitor c=1UF",
        ] {
            let (line, msg) = fault(bad);
            assert_eq!(line, 1);
            assert!(msg.contains("unknown unit"), "{bad}: {msg}");
        }
    }

    #[test]
    fn labels_given_and_assigned() {
        let m = parse(
            "zarc r=1ohm tau=1s phi=1\n\
             zarc zarc2 r=1ohm tau=1s phi=1\n\
             zarc r=1ohm tau=1s phi=1\n\
             voigt r=1ohm tau=1s\n\
             zarc a.b-c_9 r=1ohm tau=1s phi=1\n",
        )
        .unwrap();
        let labels: Vec<&str> = m.elements.iter().map(|e| e.label.as_str()).collect();
        // zarc2 is taken by the second line, so the third zarc is zarc3.
        assert_eq!(labels, ["zarc1", "zarc2", "zarc3", "voigt1", "a.b-c_9"]);
        let (line, msg) = fault("resistor a/b r=1ohm");
        assert_eq!(line, 1);
        assert!(msg.contains("label \"a/b\" may hold only"), "{msg}");
        let from = Model::from_series(&m.series());
        let labels: Vec<&str> = from.elements.iter().map(|e| e.label.as_str()).collect();
        assert_eq!(labels, ["zarc1", "zarc2", "zarc3", "voigt1", "zarc4"]);
    }

    #[test]
    fn writer_format_and_round_trip() {
        let m = parse(EXAMPLE).unwrap();
        let text = m.to_text();
        assert_eq!(
            text,
            "\
resistor              r_inf      r=150.000mohm
inductor              leads      l=80.0000nH
zarc                  anode      r=80.0000mohm  tau=20.0000us  phi=0.850000
zarc                  cathode    r=120.000mohm  tau=1.00000ms  phi=0.950000 fixed
warburg-transmissive  diffusion  r=50.0000mohm  tau=500.000ms
"
        );
        assert_eq!(parse(&text).unwrap(), m);

        // Values of every magnitude and digit pattern come back within half
        // a unit in the sixth digit (the writer's precision), and the text
        // of the text is the text.
        let mut elements = Vec::new();
        let mut x = 1.234_567_89e-14;
        while x < 1e14 {
            elements.push(Element::Voigt {
                r_ohm: x,
                tau_s: 1.0 / x,
            });
            elements.push(Element::HavriliakNegami {
                r_ohm: x * 0.999_999_7,
                tau_s: x * 9.999_996,
                alpha: (x.log10().abs() / 20.0).clamp(1e-7, 1.0),
                beta: 1.0,
            });
            x *= 3.7;
        }
        let mut model = Model::from_series(&Series(elements));
        model.elements[3].fixed = vec![true, false, true, false];
        let text = model.to_text();
        let back = parse(&text).unwrap();
        assert_eq!(back.to_text(), text);
        assert_eq!(back.elements.len(), model.elements.len());
        for (a, b) in back.elements.iter().zip(&model.elements) {
            assert_eq!(a.label, b.label);
            assert_eq!(a.fixed, b.fixed);
            for (u, v) in a.element.params().iter().zip(b.element.params()) {
                assert!(close(*u, v, 5.000_001e-6), "{u} vs {v}\n{text}");
            }
        }
        // A mantissa that rounds up to 1000 moves to the next prefix.
        let m = Model::from_series(&Series(vec![Element::Resistor { r_ohm: 0.999_999_9 }]));
        assert_eq!(m.to_text(), "resistor  resistor1  r=1.00000ohm\n");
        assert_eq!(
            format_value(1e-15, Quantity::Capacitance),
            "1.00000e-15F",
            "below the prefixes"
        );
        assert_eq!(format_value(2.5e12, Quantity::Resistance), "2.50000e12ohm");
        assert_eq!(format_value(1.0, Quantity::Exponent), "1.00000");
        assert_eq!(format_value(0.012_345_67, Quantity::Exponent), "0.0123457");
    }

    #[test]
    fn annotated_text_carries_header_and_standard_errors() {
        let m = parse(EXAMPLE).unwrap();
        let se = vec![
            vec![Some(0.31e-3)],
            vec![None],
            vec![Some(0.31e-3), Some(1.2e-6), Some(0.0021)],
            vec![Some(2.0e-3), Some(9.96e-6), None],
            vec![None, None],
        ];
        let text = m.to_text_annotated(
            &["fit of cell 7".to_string(), "chi2 = 1.2e-5".to_string()],
            Some(&se),
        );
        assert_eq!(
            text,
            "\
# fit of cell 7
# chi2 = 1.2e-5
resistor              r_inf      r=150.000mohm                                     # se r=0.31mohm
inductor              leads      l=80.0000nH
zarc                  anode      r=80.0000mohm  tau=20.0000us  phi=0.850000        # se r=0.31mohm tau=1.2us phi=0.0021
zarc                  cathode    r=120.000mohm  tau=1.00000ms  phi=0.950000 fixed  # se r=2.0mohm tau=0.010ms
warburg-transmissive  diffusion  r=50.0000mohm  tau=500.000ms
"
        );
        assert_eq!(parse(&text).unwrap(), m);
    }

    #[test]
    fn comments_blank_lines_tabs_and_crlf() {
        let m = parse(
            "\u{feff}# model\r\n\r\n  resistor\tr0 r=1ohm # series resistance\r\nzarc r=2ohm tau=1s phi=0.5#x\r\n",
        )
        .unwrap();
        assert_eq!(m.elements.len(), 2);
        assert_eq!(m.elements[0].label, "r0");
        assert!(close(m.elements[1].element.params()[2], 0.5, 0.0));
    }

    #[test]
    fn each_fault_is_reported_on_its_line() {
        let ok = "resistor r=1ohm\n";
        let cases: &[(&str, &str)] = &[
            (
                "zark r=1ohm",
                "unknown element kind \"zark\" (kinds: resistor, inductor, capacitor, voigt, \
                 zarc, havriliak-negami, warburg-transmissive, warburg-reflective, gerischer)",
            ),
            (
                "ZARC r=1ohm",
                "unknown element kind \"ZARC\" (kinds: resistor, inductor, capacitor, voigt, \
                 zarc, havriliak-negami, warburg-transmissive, warburg-reflective, gerischer; \
                 keywords are written in lower case)",
            ),
            (
                "zarc anode r=1ohm tau=1s alpha=0.5",
                "zarc \"anode\": unknown parameter \"alpha\" (zarc takes r, tau, phi)",
            ),
            (
                "zarc anode r=1ohm tau=1s",
                "zarc \"anode\": missing parameter \"phi\" (zarc takes r, tau, phi)",
            ),
            (
                "havriliak-negami r=1ohm",
                "havriliak-negami: missing parameters \"tau\", \"alpha\", \"beta\" \
                 (havriliak-negami takes r, tau, alpha, beta)",
            ),
            (
                "voigt rc r=1ohm tau=1s r=2ohm",
                "voigt \"rc\": parameter \"r\" is given twice",
            ),
            (
                "voigt rc r=1,5ohm tau=1s",
                "voigt \"rc\": cannot read \"1,5\" as a number (parameter r; use a point as the \
                 decimal separator)",
            ),
            (
                "voigt rc r=abc tau=1s",
                "voigt \"rc\": cannot read \"abc\" as a number (parameter r; write e.g. \
                 r=80mohm)",
            ),
            (
                "voigt rc r=1.2.3ohm tau=1s",
                "voigt \"rc\": cannot read \"1.2.3\" as a number (parameter r; write e.g. \
                 r=80mohm)",
            ),
            (
                "voigt rc r=80 tau=1s",
                "voigt \"rc\": r=80 has no unit (r is a resistance: ohm, Ohm or Ω right after \
                 the number, with an optional prefix p, n, u, µ, m, k, M or G, as in r=80mohm)",
            ),
            (
                "zarc r=1ohm tau=1s phi=0.5deg",
                "zarc: phi=0.5deg: phi is an exponent in (0, 1], written without a unit",
            ),
            (
                "voigt r=-5mohm tau=1s",
                "voigt: r must be positive, found -5mohm",
            ),
            (
                "voigt r=0ohm tau=1s",
                "voigt: r must be positive, found 0ohm",
            ),
            (
                "voigt r=1e400ohm tau=1s",
                "voigt: r=1e400ohm is out of the range of double precision",
            ),
            (
                "voigt r=1e300Gohm tau=1s",
                "voigt: r=1e300Gohm is out of the range of double precision once converted to ohm",
            ),
            (
                "zarc r=1ohm tau=1s phi=1.2",
                "zarc: phi must be in (0, 1], found 1.2",
            ),
            (
                "zarc r=1ohm tau=1s phi=0",
                "zarc: phi must be in (0, 1], found 0",
            ),
            (
                "zarc r=1ohm tau=1s phi=-0.5",
                "zarc: phi must be in (0, 1], found -0.5",
            ),
            (
                "zarc fixed r=1ohm tau=1s phi=1",
                "zarc: \"fixed\" must follow a parameter (as in phi=0.95 fixed)",
            ),
            (
                "zarc r=1ohm fixed fixed tau=1s phi=1",
                "zarc: \"fixed\" must follow a parameter (as in phi=0.95 fixed)",
            ),
            (
                "zarc r = 1ohm tau=1s phi=1",
                "zarc \"r\": expected NAME=VALUE or \"fixed\", found \"=\" (zarc takes r, tau, \
                 phi; write no space around '=')",
            ),
            (
                "zarc r=1ohm tau=1s phi=1 anode",
                "zarc: expected NAME=VALUE or \"fixed\", found \"anode\" (zarc takes r, tau, \
                 phi; a label goes right after the kind)",
            ),
        ];
        for (bad, want) in cases {
            // The fault is on line 3, after a comment and a good element.
            let text = format!("# cell\n{ok}{bad}\n{ok}");
            let (line, msg) = fault(&text);
            assert_eq!(line, 3, "{bad}");
            assert_eq!(msg, *want, "{bad}");
        }
        let (line, msg) = fault("voigt a r=1ohm tau=1s\n\nvoigt a r=2ohm tau=2s\n");
        assert_eq!(line, 3);
        assert_eq!(
            msg,
            "voigt: duplicate label \"a\" (also on line 1; labels must be unique)"
        );
    }

    #[test]
    fn a_file_without_elements_is_an_error_at_its_last_line() {
        for (text, want) in [("", 1), ("\n", 1), ("# a\n\n# b\n", 3), ("  # a", 1)] {
            let (line, msg) = fault(text);
            assert_eq!(line, want, "{text:?}");
            assert!(msg.starts_with("no element in the model file"), "{msg}");
        }
    }

    #[test]
    fn bytes_too_many_or_not_utf8() {
        let path = Path::new("cell.model");
        let e = Model::parse_bytes(b"resistor r=1ohm\nzarc \xff r=1ohm\n", path).unwrap_err();
        assert_eq!(
            e.to_string(),
            "cell.model:2: byte 0xff is not UTF-8 text (save the model as UTF-8 text)"
        );
        // One byte past the limit, on the third line.
        let mut big = b"# a\n# b\n#".to_vec();
        big.resize(MAX_MODEL_BYTES as usize + 1, b'x');
        let e = Model::parse_bytes(&big, path).unwrap_err();
        assert_eq!(
            e.to_string(),
            "cell.model:3: the model file is larger than 1 MiB (1048576 bytes); a model is a \
             few lines of text"
        );
        big.truncate(MAX_MODEL_BYTES as usize);
        // At the limit the file is read (and here holds no element).
        let e = Model::parse_bytes(&big, path).unwrap_err();
        assert!(e.to_string().contains("no element"), "{e}");
    }

    #[test]
    fn read_refuses_a_large_file_and_reads_a_good_one() {
        let dir = tempfile::tempdir().unwrap();
        let good = dir.path().join("cell.model");
        std::fs::write(&good, EXAMPLE).unwrap();
        assert_eq!(Model::read(&good).unwrap(), parse(EXAMPLE).unwrap());
        let big = dir.path().join("big.model");
        std::fs::write(&big, vec![b'#'; 3 << 20]).unwrap();
        let e = Model::read(&big).unwrap_err();
        assert!(e.to_string().contains("larger than 1 MiB"), "{e}");
        let e = Model::read(&dir.path().join("absent.model")).unwrap_err();
        assert!(matches!(e, Error::Io { .. }), "{e}");
    }
}
