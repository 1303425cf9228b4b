//! Which column holds which quantity, and in which unit.
//!
//! The readers recognise columns by their headings ([`super::table`]); this
//! module holds what both readers share beyond that: a user's explicit
//! choice of columns ([`ColumnMap`], the `--column ROLE=HEADING` and
//! `--unit ROLE=UNIT` options of the command line) and the reading of a
//! unit with an SI prefix ([`unit_factor`]).
//!
//! # SI prefixes and their case
//! A unit is a base unit (`Hz`, `ohm`, `Ω`, `s`, `V`, `A`) optionally led by
//! one SI prefix (BIPM, *The International System of Units*, 9th ed., 2019,
//! table 7): `G` 1e9, `M` 1e6, `k` 1e3, `m` 1e-3, `µ`/`u` 1e-6, `n` 1e-9.
//! `m` and `M` differ only in case, so they are read from the case only
//! when the base unit is written in its usual case (`Hz`; `ohm`, `Ohm` or
//! `Ω`): `mHz`, `MHz`, `mOhm`, `MOhm`, `mΩ`. When the base is not
//! (`MHZ`, `mhz`, `MOHM`) the heading is ambiguous and refused, naming the
//! `--unit` option that settles it. `K` for kilo is common practice in
//! instrument headings (`KHz`) and unambiguous, so it is accepted.

use crate::error::{Error, Result};
use crate::io::table::{TableHead, excerpt, normalize_name};

/// Which column holds a quantity: its 1-based position or its heading.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ColumnSelector {
    /// The column at this 0-based index (written `#N`, 1-based).
    Index(usize),
    /// The column whose heading is this text: matched exactly (ignoring
    /// case and surrounding spaces), else by normalised name.
    Heading(String),
}

/// Columns and units chosen by the user, overriding recognition by name.
/// Roles are the quantity names of each reader (see [`crate::io::spectrum`]
/// and [`crate::io::transient`]).
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct ColumnMap {
    /// `(role, selector)` pairs, in the order given.
    pub columns: Vec<(String, ColumnSelector)>,
    /// `(role, unit)` pairs: the unit of the role's column, overriding (or
    /// supplying) the unit in its heading.
    pub units: Vec<(String, String)>,
}

impl ColumnMap {
    /// Adds one `ROLE=HEADING` or `ROLE=#N` choice, as typed on the
    /// command line. The role is checked later by the reader.
    pub fn add_column(&mut self, spec: &str) -> Result<()> {
        let (role, value) = split_assignment(spec, "--column", "ROLE=HEADING or ROLE=#N")?;
        let selector = match value.strip_prefix('#') {
            Some(n) => match n.trim().parse::<usize>() {
                Ok(k) if k >= 1 => ColumnSelector::Index(k - 1),
                _ => {
                    return Err(Error::Config(format!(
                        "--column {spec}: \"#{n}\" is not a column number (columns count from #1)"
                    )));
                }
            },
            None => ColumnSelector::Heading(value),
        };
        self.columns.push((role, selector));
        Ok(())
    }

    /// Adds one `ROLE=UNIT` choice, as typed on the command line.
    pub fn add_unit(&mut self, spec: &str) -> Result<()> {
        let (role, unit) = split_assignment(spec, "--unit", "ROLE=UNIT")?;
        self.units.push((role, unit));
        Ok(())
    }

    /// Refuses roles that the reader does not know, listing those it does.
    pub fn check_roles(&self, known: &[&str]) -> Result<()> {
        let roles = self
            .columns
            .iter()
            .map(|(r, _)| (r, "--column"))
            .chain(self.units.iter().map(|(r, _)| (r, "--unit")));
        for (role, option) in roles {
            if !known.contains(&role.as_str()) {
                return Err(Error::Config(format!(
                    "{option}: unknown role \"{role}\" for this input (use one of {})",
                    known.join(", ")
                )));
            }
        }
        let mut seen: Vec<&str> = Vec::new();
        for (role, _) in &self.columns {
            if seen.contains(&role.as_str()) {
                return Err(Error::Config(format!(
                    "--column: role \"{role}\" is given twice"
                )));
            }
            seen.push(role);
        }
        Ok(())
    }

    /// The column chosen for `role` in `head`, if the user chose one.
    ///
    /// Fails at the header line when the selector names no column or
    /// several.
    pub fn column(&self, head: &TableHead, role: &str) -> Result<Option<usize>> {
        let Some((_, selector)) = self.columns.iter().find(|(r, _)| r == role) else {
            return Ok(None);
        };
        let n = head.header.len();
        let err = |msg: String| head.error(head.header_line, msg);
        match selector {
            ColumnSelector::Index(i) if *i < n => Ok(Some(*i)),
            ColumnSelector::Index(i) => Err(err(format!(
                "--column {role}=#{}: the header has only {n} column(s)",
                i + 1
            ))),
            ColumnSelector::Heading(h) => {
                let exact: Vec<usize> = (0..n)
                    .filter(|&c| head.header[c].trim().eq_ignore_ascii_case(h.trim()))
                    .collect();
                let found = if exact.is_empty() {
                    let want = normalize_name(h);
                    (0..n)
                        .filter(|&c| normalize_name(&head.header[c]) == want)
                        .collect()
                } else {
                    exact
                };
                match found[..] {
                    [only] => Ok(Some(only)),
                    [] => Err(err(format!(
                        "--column {role}={h}: no column has that heading (headings: {})",
                        head.header
                            .iter()
                            .map(|h| format!("\"{}\"", excerpt(h)))
                            .collect::<Vec<_>>()
                            .join(", ")
                    ))),
                    [a, b, ..] => Err(err(format!(
                        "--column {role}={h}: columns #{} and #{} both have that heading \
                         (choose by number, e.g. --column {role}=#{})",
                        a + 1,
                        b + 1,
                        a + 1
                    ))),
                }
            }
        }
    }

    /// The unit the user gave for `role`, if any.
    pub fn unit(&self, role: &str) -> Option<&str> {
        self.units
            .iter()
            .find(|(r, _)| r == role)
            .map(|(_, u)| u.as_str())
    }

    /// Whether the user chose anything.
    pub fn is_empty(&self) -> bool {
        self.columns.is_empty() && self.units.is_empty()
    }
}

fn split_assignment(spec: &str, option: &str, form: &str) -> Result<(String, String)> {
    match spec.split_once('=') {
        Some((role, value)) if !role.trim().is_empty() && !value.trim().is_empty() => {
            Ok((role.trim().to_lowercase(), value.trim().to_string()))
        }
        _ => Err(Error::Config(format!("{option} {spec}: expected {form}"))),
    }
}

/// A base unit: its spellings (compared ignoring case), the spellings in
/// its usual case (which make an `m`/`M` prefix readable), its factor to
/// the reader's unit, and the prefixes it may carry.
#[derive(Debug, Clone, Copy)]
pub struct BaseUnit {
    /// Every accepted spelling, lower case.
    pub spellings: &'static [&'static str],
    /// Spellings in the usual case.
    pub usual: &'static [&'static str],
    /// Factor to the reader's unit (e.g. 180/pi for a radian phase read in
    /// degrees).
    pub factor: f64,
    /// SI prefixes accepted with this unit (`"mkM"`).
    pub prefixes: &'static str,
}

/// Hertz.
pub const HZ: BaseUnit = BaseUnit {
    spellings: &["hz"],
    usual: &["Hz"],
    factor: 1.0,
    prefixes: "mkM",
};
/// Ohm: the lower case of both omega signs (U+03A9, U+2126) is U+03C9.
pub const OHM: BaseUnit = BaseUnit {
    spellings: &["ohm", "ohms", "\u{3c9}"],
    usual: &["ohm", "Ohm", "ohms", "Ohms", "\u{3a9}", "\u{2126}"],
    factor: 1.0,
    prefixes: "umkMG",
};
/// Degrees of angle.
pub const DEGREE: BaseUnit = BaseUnit {
    spellings: &["deg", "degree", "degrees", "\u{b0}"],
    usual: &["deg"],
    factor: 1.0,
    prefixes: "",
};
/// Radians, read as degrees.
pub const RADIAN: BaseUnit = BaseUnit {
    spellings: &["rad", "radian", "radians"],
    usual: &["rad"],
    factor: 180.0 / std::f64::consts::PI,
    prefixes: "",
};

/// Seconds.
pub const SECOND: BaseUnit = BaseUnit {
    spellings: &["s", "sec", "second", "seconds"],
    usual: &["s"],
    factor: 1.0,
    prefixes: "mun",
};
/// Minutes, read as seconds.
pub const MINUTE: BaseUnit = BaseUnit {
    spellings: &["min", "minute", "minutes"],
    usual: &["min"],
    factor: 60.0,
    prefixes: "",
};
/// Hours, read as seconds.
pub const HOUR: BaseUnit = BaseUnit {
    spellings: &["h", "hour", "hours"],
    usual: &["h"],
    factor: 3600.0,
    prefixes: "",
};
/// Volts.
pub const VOLT: BaseUnit = BaseUnit {
    spellings: &["v", "volt", "volts"],
    usual: &["V"],
    factor: 1.0,
    prefixes: "mu",
};
/// Amperes.
pub const AMPERE: BaseUnit = BaseUnit {
    spellings: &["a", "amp", "ampere", "amperes"],
    usual: &["A"],
    factor: 1.0,
    prefixes: "mun",
};
/// What [`unit_factor`] made of a unit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum UnitReading {
    /// The factor from the unit to the reader's unit.
    Factor(f64),
    /// A prefix `m`/`M` with a base unit not in its usual case.
    Ambiguous,
    /// Not one of the units.
    Unknown,
}

/// The factor of one SI prefix (BIPM SI Brochure, 9th ed., table 7).
fn prefix_factor(p: char) -> Option<f64> {
    Some(match p {
        'G' => 1e9,
        'M' => 1e6,
        'k' | 'K' => 1e3,
        'm' => 1e-3,
        'u' | '\u{b5}' | '\u{3bc}' => 1e-6,
        'n' => 1e-9,
        _ => return None,
    })
}

/// Reads `unit` as one of `bases`, optionally with an SI prefix; see the
/// module documentation for the case rule of `m` and `M`.
pub fn unit_factor(unit: &str, bases: &[BaseUnit]) -> UnitReading {
    let u = unit.trim();
    let lower = u.to_lowercase();
    for b in bases {
        if b.spellings.contains(&lower.as_str()) {
            return UnitReading::Factor(b.factor);
        }
    }
    let mut chars = u.chars();
    let Some(p) = chars.next() else {
        return UnitReading::Unknown;
    };
    let rest = chars.as_str();
    let rest_lower = rest.to_lowercase();
    for b in bases {
        if !b.spellings.contains(&rest_lower.as_str()) {
            continue;
        }
        // `K` is read as kilo, `µ`/`μ` as `u`.
        let key = match p {
            'K' => 'k',
            '\u{b5}' | '\u{3bc}' => 'u',
            p => p,
        };
        if !b.prefixes.contains(key) {
            continue;
        }
        let both_m = b.prefixes.contains('m') && b.prefixes.contains('M');
        if (p == 'm' || p == 'M') && both_m && !b.usual.contains(&rest) {
            return UnitReading::Ambiguous;
        }
        if let Some(f) = prefix_factor(p) {
            return UnitReading::Factor(f * b.factor);
        }
    }
    UnitReading::Unknown
}

/// The spellings of a unit list for messages: `Hz, mHz, kHz, MHz`.
pub fn unit_examples(bases: &[BaseUnit]) -> String {
    let mut out = Vec::new();
    for b in bases {
        let base = b.usual.first().copied().unwrap_or(b.spellings[0]);
        out.push(base.to_string());
        for p in b.prefixes.chars() {
            out.push(format!("{p}{base}"));
        }
    }
    out.join(", ")
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::Path;

    fn f(u: &str, b: &[BaseUnit]) -> UnitReading {
        unit_factor(u, b)
    }

    #[test]
    fn prefixes_follow_the_si_brochure_and_their_case() {
        use UnitReading::*;
        assert_eq!(f("Hz", &[HZ]), Factor(1.0));
        assert_eq!(f("HZ", &[HZ]), Factor(1.0));
        assert_eq!(f("mHz", &[HZ]), Factor(1e-3));
        assert_eq!(f("kHz", &[HZ]), Factor(1e3));
        assert_eq!(f("KHz", &[HZ]), Factor(1e3));
        assert_eq!(f("KHZ", &[HZ]), Factor(1e3));
        assert_eq!(f("MHz", &[HZ]), Factor(1e6));
        assert_eq!(f("MHZ", &[HZ]), Ambiguous);
        assert_eq!(f("mhz", &[HZ]), Ambiguous);
        assert_eq!(f("GHz", &[HZ]), Unknown);
        assert_eq!(f("s", &[HZ]), Unknown);
        assert_eq!(f("mOhm", &[OHM]), Factor(1e-3));
        assert_eq!(f("mohm", &[OHM]), Factor(1e-3));
        assert_eq!(f("m\u{3a9}", &[OHM]), Factor(1e-3));
        assert_eq!(f("k\u{3a9}", &[OHM]), Factor(1e3));
        assert_eq!(f("kOhm", &[OHM]), Factor(1e3));
        assert_eq!(f("MOhm", &[OHM]), Factor(1e6));
        assert_eq!(f("M\u{2126}", &[OHM]), Factor(1e6));
        assert_eq!(f("GOhm", &[OHM]), Factor(1e9));
        assert_eq!(f("\u{b5}Ohm", &[OHM]), Factor(1e-6));
        assert_eq!(f("MOHM", &[OHM]), Ambiguous);
        assert_eq!(f("mOHM", &[OHM]), Ambiguous);
        assert_eq!(f("Ohm*cm2", &[OHM]), Unknown);
    }

    fn head(names: &[&str]) -> TableHead {
        TableHead {
            path: Path::new("cell.csv").to_path_buf(),
            delimiter: ',',
            header: names.iter().map(|s| s.to_string()).collect(),
            header_text: names.join(","),
            header_line: 3,
            preamble: None,
            decimal: std::cell::Cell::new(None),
        }
    }

    #[test]
    fn column_choices_by_number_and_heading() {
        let mut m = ColumnMap::default();
        m.add_column("frequency=#2").unwrap();
        m.add_column("Real = Z' (Ohm)").unwrap();
        m.add_column("imag=zim").unwrap();
        m.add_unit("frequency=kHz").unwrap();
        let h = head(&["idx", "f", "Z' (Ohm)", "ZIM [Ohm]"]);
        assert_eq!(m.column(&h, "frequency").unwrap(), Some(1));
        assert_eq!(m.column(&h, "real").unwrap(), Some(2));
        assert_eq!(m.column(&h, "imag").unwrap(), Some(3));
        assert_eq!(m.column(&h, "phase").unwrap(), None);
        assert_eq!(m.unit("frequency"), Some("kHz"));
        assert!(m.check_roles(&["frequency", "real", "imag"]).is_ok());
        assert_eq!(
            m.check_roles(&["frequency", "real"])
                .unwrap_err()
                .to_string(),
            "--column: unknown role \"imag\" for this input (use one of frequency, real)"
        );
    }

    #[test]
    fn column_choice_errors() {
        let mut m = ColumnMap::default();
        assert_eq!(
            m.add_column("frequency").unwrap_err().to_string(),
            "--column frequency: expected ROLE=HEADING or ROLE=#N"
        );
        assert_eq!(
            m.add_column("frequency=#0").unwrap_err().to_string(),
            "--column frequency=#0: \"#0\" is not a column number (columns count from #1)"
        );
        m.add_column("frequency=#9").unwrap();
        m.add_column("real=re").unwrap();
        m.add_column("imag=nothing").unwrap();
        let h = head(&["f", "re", "Re"]);
        assert_eq!(
            m.column(&h, "frequency").unwrap_err().to_string(),
            "cell.csv:3: --column frequency=#9: the header has only 3 column(s)"
        );
        assert_eq!(
            m.column(&h, "real").unwrap_err().to_string(),
            "cell.csv:3: --column real=re: columns #2 and #3 both have that heading \
             (choose by number, e.g. --column real=#2)"
        );
        assert_eq!(
            m.column(&h, "imag").unwrap_err().to_string(),
            "cell.csv:3: --column imag=nothing: no column has that heading \
             (headings: \"f\", \"re\", \"Re\")"
        );
        m.add_column("real=#1").unwrap();
        assert_eq!(
            m.check_roles(&["frequency", "real", "imag"])
                .unwrap_err()
                .to_string(),
            "--column: role \"real\" is given twice"
        );
    }
}
