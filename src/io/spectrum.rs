//! Reader for impedance spectra.
//!
//! A spectrum file is a delimited table (see [`crate::io::table`] for the
//! accepted layout: delimiter, comments, quoting, encoding) whose canonical
//! header is [`CANONICAL_HEADER`], `frequency_hz,z_re_ohm,z_im_ohm`.
//!
//! Columns are recognised by name, case-insensitively after normalisation
//! ([`crate::io::table::split_unit`]), in any order; other columns are
//! ignored. Accepted names:
//!
//! | quantity | names |
//! |---|---|
//! | frequency (Hz) | `frequency_hz`, `frequency`, `freq`, `f`, `freq_hz`, `f_hz` |
//! | real part (Ω) | `z_re_ohm`, `real`, `re`, `z'`, `zreal`, `z_re`, `zre`, `z_real` |
//! | imaginary part (Ω) | `z_im_ohm`, `imag`, `im`, `z''`, `zimag`, `z_im`, `zim`, `z_imag` |
//! | negated imaginary part (Ω) | `-z''`, `-imag`, `-im`, `-z_im`, `-z_im_ohm`, `neg_z_im_ohm`, `minus_z_im`, `-zimag`, … |
//! | modulus (Ω) | `modulus`, `mod`, `\|z\|`, `z_mod_ohm`, `zmod`, `magnitude`, `z_abs_ohm` |
//! | phase (degrees) | `phase`, `phase_deg`, `phi`, `theta`, `z_phase_deg`, `φ`, `θ`, `phase_angle` |
//! | negated phase (degrees) | `-phase`, `-phase_deg`, `-phi`, `-φ`, `-theta`, `-z_phase_deg`, `neg_phase`, … |
//!
//! A unit written after the name (`Freq (Hz)`, `Z' [Ohm]`, `Phase/deg`,
//! the ISO 80000-1 quantity/unit heading `f/kHz`) is read with its SI
//! prefix: Hz, mHz, kHz, MHz; ohm (or Ω) with µ, m, k, M or G; degrees
//! (`deg`, `°`) or radians (`rad`). The case rule that tells `m` from `M`
//! is in [`crate::io::columns`]. Other units are rejected rather than
//! guessed. Real and imaginary columns take precedence over modulus and
//! phase; a plain imaginary column takes precedence over a negated one.
//!
//! A user's choice of columns and units ([`ColumnMap`], roles [`ROLES`])
//! overrides recognition by name, and settles every ambiguity.
//!
//! # Layout beyond the table module
//! - The header is the first line that names a frequency column and an
//!   impedance column; free text above it (an instrument's settings, not
//!   marked with `#`) is skipped and reported in
//!   [`SpectrumLayout::preamble`].
//! - At most [`MAX_POINTS`] points; the rows are streamed, so memory does
//!   not grow with the size of the file.
//!
//! # Sign convention
//!
//! [`Spectrum::z_im_ohm`] keeps its physical sign: negative where the
//! response is capacitive. A negated-imaginary column (`-Z''`) is converted
//! on reading. A modulus-and-phase pair is converted with
//! `Z = |Z| (cos φ + j sin φ)`, φ in degrees.

use std::fs::File;
use std::io::{BufRead, BufReader};
use std::path::Path;

use crate::error::{Error, Result};
use crate::io::columns::{
    BaseUnit, ColumnMap, DEGREE, HZ, OHM, RADIAN, UnitReading, unit_examples, unit_factor,
};
use crate::io::table::{Row, TableHead, TableReader, TextEncoding, excerpt, split_unit};

/// Minimum number of points a spectrum file must hold.
pub const MIN_POINTS: usize = 5;

/// Maximum number of points a spectrum file may hold. A measured spectrum
/// has tens to a few thousand frequencies; the inversion's cost grows with
/// the square of the count, so a larger file is a mistake (a transient, a
/// concatenation) and is refused at its first surplus row.
pub const MAX_POINTS: usize = 100_000;

/// The header written by taumap and shown in messages as the model to follow.
pub const CANONICAL_HEADER: &str = "frequency_hz,z_re_ohm,z_im_ohm";

/// Example header for modulus-and-phase data, shown in messages.
const POLAR_HEADER: &str = "frequency_hz,z_mod_ohm,z_phase_deg";

/// The roles of spectrum columns, as `--column ROLE=…` and `--unit ROLE=…`
/// name them.
pub const ROLES: &[&str] = &[
    "frequency",
    "real",
    "imag",
    "neg-imag",
    "modulus",
    "phase",
    "neg-phase",
];

/// The roles in words, for messages; same order as [`ROLES`].
const ROLE_WORDS: [&str; 7] = [
    "frequency",
    "real part",
    "imaginary part",
    "negated imaginary part",
    "modulus",
    "phase",
    "negated phase",
];

const FREQUENCY_NAMES: &[&str] = &["frequency_hz", "frequency", "freq", "f", "freq_hz", "f_hz"];
const REAL_NAMES: &[&str] = &[
    "z_re_ohm", "real", "re", "z'", "zreal", "z_re", "zre", "z_real",
];
const IMAG_NAMES: &[&str] = &[
    "z_im_ohm", "imag", "im", "z''", "zimag", "z_im", "zim", "z_imag",
];
const NEG_IMAG_NAMES: &[&str] = &[
    "-z''",
    "-imag",
    "-im",
    "-z_im",
    "-z_im_ohm",
    "neg_z_im_ohm",
    "neg_z_im",
    "minus_z_im",
    "minus_z_im_ohm",
    "-zimag",
    "-z_imag",
    "-zim",
];
const MODULUS_NAMES: &[&str] = &[
    "modulus",
    "mod",
    "|z|",
    "z_mod_ohm",
    "zmod",
    "magnitude",
    "z_abs_ohm",
];
const PHASE_NAMES: &[&str] = &[
    "phase",
    "phase_deg",
    "phi",
    "theta",
    "z_phase_deg",
    "z_phase",
    "phase_angle",
    "\u{3c6}",
    "\u{3d5}",
    "\u{3b8}",
];
const NEG_PHASE_NAMES: &[&str] = &[
    "-phase",
    "-phase_deg",
    "-phi",
    "-theta",
    "-z_phase_deg",
    "-z_phase",
    "-phase_angle",
    "-\u{3c6}",
    "-\u{3d5}",
    "-\u{3b8}",
    "neg_phase",
    "neg_phase_deg",
    "minus_phase",
];

/// Heading names of each role; same order as [`ROLES`].
const ROLE_NAMES: [&[&str]; 7] = [
    FREQUENCY_NAMES,
    REAL_NAMES,
    IMAG_NAMES,
    NEG_IMAG_NAMES,
    MODULUS_NAMES,
    PHASE_NAMES,
    NEG_PHASE_NAMES,
];

/// Units of each role; same order as [`ROLES`].
const ROLE_UNITS: [&[BaseUnit]; 7] = [
    &[HZ],
    &[OHM],
    &[OHM],
    &[OHM],
    &[OHM],
    &[DEGREE, RADIAN],
    &[DEGREE, RADIAN],
];

/// An impedance spectrum, sorted by ascending frequency.
///
/// Sign convention: `z_im_ohm` keeps its physical sign (negative when
/// capacitive). Values built by [`Spectrum::new`] or read from a file are
/// finite, frequencies are positive and distinct, and the three vectors have
/// the same length.
#[derive(Debug, Clone, PartialEq)]
pub struct Spectrum {
    /// Frequencies in Hz, strictly ascending.
    pub frequency_hz: Vec<f64>,
    /// Real part of the impedance in Ω.
    pub z_re_ohm: Vec<f64>,
    /// Imaginary part of the impedance in Ω, with its physical sign.
    pub z_im_ohm: Vec<f64>,
}

impl Spectrum {
    /// Builds a spectrum from three equally long vectors, sorting the points
    /// by ascending frequency.
    ///
    /// Fails with [`Error::Data`] when the lengths differ, a value is not
    /// finite, a frequency is not positive, or two frequencies are equal
    /// (indices in messages refer to the input order, from 0). The number of
    /// points is not checked here; the file readers require [`MIN_POINTS`].
    pub fn new(frequency_hz: Vec<f64>, z_re_ohm: Vec<f64>, z_im_ohm: Vec<f64>) -> Result<Self> {
        let n = frequency_hz.len();
        if z_re_ohm.len() != n {
            return Err(Error::Data(format!(
                "{n} frequencies but {} real parts",
                z_re_ohm.len()
            )));
        }
        if z_im_ohm.len() != n {
            return Err(Error::Data(format!(
                "{n} frequencies but {} imaginary parts",
                z_im_ohm.len()
            )));
        }
        let mut points = Vec::with_capacity(n);
        for (i, ((&f, &re), &im)) in frequency_hz
            .iter()
            .zip(&z_re_ohm)
            .zip(&z_im_ohm)
            .enumerate()
        {
            if !(f.is_finite() && f > 0.0) {
                return Err(Error::Data(format!(
                    "frequency_hz[{i}] must be positive and finite, found {f}"
                )));
            }
            if !re.is_finite() {
                return Err(Error::Data(format!(
                    "z_re_ohm[{i}] must be finite, found {re}"
                )));
            }
            if !im.is_finite() {
                return Err(Error::Data(format!(
                    "z_im_ohm[{i}] must be finite, found {im}"
                )));
            }
            points.push(Point { f, re, im, at: i });
        }
        sort_points(&mut points);
        if let Some((a, b)) = first_duplicate(&points) {
            return Err(Error::Data(format!(
                "duplicate frequency {} Hz (indices {} and {})",
                a.f, a.at, b.at
            )));
        }
        Ok(Self::from_sorted(&points))
    }

    /// Number of frequencies.
    pub fn len(&self) -> usize {
        self.frequency_hz.len()
    }

    /// Whether the spectrum holds no points.
    pub fn is_empty(&self) -> bool {
        self.frequency_hz.is_empty()
    }

    /// The same spectrum with the impedance multiplied by `k` (frequencies
    /// unchanged). `k` should be finite to keep the values finite.
    #[must_use]
    pub fn scaled(&self, k: f64) -> Spectrum {
        debug_assert!(k.is_finite(), "scale factor must be finite, got {k}");
        Spectrum {
            frequency_hz: self.frequency_hz.clone(),
            z_re_ohm: self.z_re_ohm.iter().map(|v| v * k).collect(),
            z_im_ohm: self.z_im_ohm.iter().map(|v| v * k).collect(),
        }
    }

    fn from_sorted(points: &[Point]) -> Self {
        Spectrum {
            frequency_hz: points.iter().map(|p| p.f).collect(),
            z_re_ohm: points.iter().map(|p| p.re).collect(),
            z_im_ohm: points.iter().map(|p| p.im).collect(),
        }
    }
}

/// How a spectrum file was interpreted, for reporting.
#[derive(Debug, Clone, PartialEq)]
pub struct SpectrumLayout {
    /// Field delimiter detected from the header line.
    pub delimiter: char,
    /// 1-based line number of the header.
    pub header_line: usize,
    /// 0-based field indices of the columns used: frequency, then real part
    /// and imaginary part, or modulus and phase when [`Self::polar`] is set.
    pub columns: [usize; 3],
    /// Names of the columns used, as written in the header, in the order of
    /// [`Self::columns`].
    pub column_names: [String; 3],
    /// The imaginary column held −Z'' and was negated on reading.
    pub negated_imag: bool,
    /// The impedance was given as modulus (Ω) and phase (degrees).
    pub polar: bool,
    /// More than half the points have `z_im_ohm > 0` (inductive). This is
    /// legal, but for most cells it means the sign is flipped in the file.
    pub imag_mostly_positive: bool,
    /// Header names of the columns that were not used, in file order.
    pub ignored_columns: Vec<String>,
    /// The phase column held −φ and was negated on reading.
    pub negated_phase: bool,
    /// Factors from the units of the columns used to Hz, Ω and Ω (or
    /// degrees), in the order of [`Self::columns`]: `1e3` for `kHz`.
    pub factors: [f64; 3],
    /// First and last line of free text skipped above the header.
    pub preamble: Option<(usize, usize)>,
    /// The text encoding the file was read in.
    pub encoding: TextEncoding,
}

/// Opens and reads a spectrum file; see [`parse_spectrum`].
///
/// Fails with [`Error::Io`] when the file cannot be opened or read.
pub fn read_spectrum(path: &Path) -> Result<Spectrum> {
    read_spectrum_with_layout(path).map(|(spectrum, _)| spectrum)
}

/// Opens and reads a spectrum file, also returning how it was interpreted;
/// see [`parse_spectrum_with_layout`].
pub fn read_spectrum_with_layout(path: &Path) -> Result<(Spectrum, SpectrumLayout)> {
    read_spectrum_with(path, &ColumnMap::default())
}

/// Opens and reads a spectrum file with the user's choice of columns and
/// units; see [`parse_spectrum_with`]. The path `-` reads standard input.
pub fn read_spectrum_with(path: &Path, map: &ColumnMap) -> Result<(Spectrum, SpectrumLayout)> {
    if path == Path::new("-") {
        let stdin = std::io::stdin();
        return parse_spectrum_with(stdin.lock(), Path::new("<stdin>"), map);
    }
    let file = File::open(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })?;
    parse_spectrum_with(BufReader::new(file), path, map)
}

/// Parses a spectrum from `reader`; `path` only labels errors.
///
/// Fails with [`Error::Parse`] at the offending line for unusable text,
/// missing or ambiguous columns, unsupported units, non-numeric or
/// non-finite values, frequencies `<= 0`, duplicate frequencies, more than
/// [`MAX_POINTS`] points and a negated-imaginary column that already
/// carries the physical sign; with [`Error::TooFewPoints`] below
/// [`MIN_POINTS`] points.
pub fn parse_spectrum<R: BufRead>(reader: R, path: &Path) -> Result<Spectrum> {
    parse_spectrum_with_layout(reader, path).map(|(spectrum, _)| spectrum)
}

/// Like [`parse_spectrum`], also returning the [`SpectrumLayout`] found.
pub fn parse_spectrum_with_layout<R: BufRead>(
    reader: R,
    path: &Path,
) -> Result<(Spectrum, SpectrumLayout)> {
    parse_spectrum_with(reader, path, &ColumnMap::default())
}

/// Like [`parse_spectrum_with_layout`], with the user's choice of columns
/// and units (roles [`ROLES`]) taking precedence over recognition by name.
///
/// The rows are read one at a time: memory follows the number of points
/// (at most [`MAX_POINTS`]), not the size of the file.
pub fn parse_spectrum_with<R: BufRead>(
    reader: R,
    path: &Path,
    map: &ColumnMap,
) -> Result<(Spectrum, SpectrumLayout)> {
    let (mut table, choice) = open_spectrum_table(reader, path, map)?;
    let mut points = Vec::new();
    while let Some(row) = table.next_row()? {
        if points.len() == MAX_POINTS {
            return Err(table.error(
                row.line,
                format!(
                    "more than {MAX_POINTS} points: taumap inverts at most {MAX_POINTS} \
                     frequencies (thin the file or split it)"
                ),
            ));
        }
        points.push(row_point(&table, &row, &choice)?);
    }
    let (points, imag_mostly_positive) = finish_points(points, &table, path, &choice)?;
    let layout = layout_of(&table, &choice, imag_mostly_positive, table.encoding());
    Ok((Spectrum::from_sorted(&points), layout))
}

/// Finds the header of a spectrum table and the columns that hold the
/// spectrum.
fn open_spectrum_table<R: BufRead>(
    reader: R,
    path: &Path,
    map: &ColumnMap,
) -> Result<(TableReader<R>, Choice)> {
    map.check_roles(ROLES)?;
    let found = TableReader::find_header(reader, path, CANONICAL_HEADER, |head| {
        names_a_spectrum(head, map)
    })?;
    let table = match found {
        Ok(table) => table,
        Err(no) => {
            // One line examined: explain what that line lacks; several: the
            // file has free text but no recognisable header.
            if no.single_candidate() {
                choose_columns(&no.first, map)?;
            }
            return Err(no.error("frequency and impedance columns", CANONICAL_HEADER));
        }
    };
    let choice = choose_columns(&table, map)?;
    Ok((table, choice))
}

/// How `table` was read with `choice`.
fn layout_of(
    table: &TableHead,
    choice: &Choice,
    imag_mostly_positive: bool,
    encoding: TextEncoding,
) -> SpectrumLayout {
    SpectrumLayout {
        delimiter: table.delimiter,
        header_line: table.header_line,
        columns: choice.columns,
        column_names: choice.columns.map(|c| table.column_name(c).to_string()),
        negated_imag: choice.negated && !choice.polar,
        polar: choice.polar,
        imag_mostly_positive,
        ignored_columns: table
            .header
            .iter()
            .enumerate()
            .filter(|(i, _)| !choice.columns.contains(i))
            .map(|(_, name)| name.clone())
            .collect(),
        negated_phase: choice.negated && choice.polar,
        factors: choice.factors,
        preamble: table.preamble,
        encoding,
    }
}

/// One row of `table` as a point of the spectrum (`choice` says where).
fn row_point(table: &TableHead, row: &Row, choice: &Choice) -> Result<Point> {
    let [f_col, a_col, b_col] = choice.columns;
    let [f_scale, a_scale, b_scale] = choice.factors;
    let f = table.converted(row, f_col, f_scale)?;
    if f <= 0.0 {
        return Err(table.error(
            row.line,
            format!(
                "frequency must be positive, found {} (column {})",
                excerpt(row.field(f_col)),
                table.column_name(f_col)
            ),
        ));
    }
    let a = table.converted(row, a_col, a_scale)?;
    let b = table.converted(row, b_col, b_scale)?;
    let (re, im) = if choice.polar {
        if a < 0.0 {
            return Err(table.error(
                row.line,
                format!(
                    "modulus must not be negative, found {} (column {})",
                    excerpt(row.field(a_col)),
                    table.column_name(a_col)
                ),
            ));
        }
        let phi = if choice.negated { -b } else { b }.to_radians();
        (a * phi.cos(), a * phi.sin())
    } else if choice.negated {
        (a, -b)
    } else {
        (a, b)
    };
    Ok(Point {
        f,
        re,
        im,
        at: row.line,
    })
}

/// The points of one spectrum sorted by frequency and checked (no repeated
/// frequency, at least [`MIN_POINTS`], a negated imaginary column that
/// does not carry the physical sign already); also whether most imaginary
/// parts are positive.
fn finish_points(
    mut points: Vec<Point>,
    table: &TableHead,
    path: &Path,
    choice: &Choice,
) -> Result<(Vec<Point>, bool)> {
    let b_col = choice.columns[2];
    sort_points(&mut points);
    if let Some((a, b)) = first_duplicate(&points) {
        return Err(table.error(
            b.at,
            format!("duplicate frequency {} Hz (also on line {})", a.f, a.at),
        ));
    }
    if points.len() < MIN_POINTS {
        return Err(Error::TooFewPoints {
            path: path.to_path_buf(),
            needed: MIN_POINTS,
            found: points.len(),
        });
    }

    let n = points.len();
    let n_positive = points.iter().filter(|p| p.im > 0.0).count();
    let imag_mostly_positive = 2 * n_positive > n;
    if choice.negated && imag_mostly_positive {
        let name = table.column_name(b_col);
        let (what, plain) = if choice.polar {
            ("negated phase", "z_phase_deg")
        } else {
            ("negated imaginary part", "z_im_ohm")
        };
        return Err(table.error(
            table.header_line,
            format!(
                "column \"{name}\" should hold the {what}, but {n_positive} \
                 of {n} values are negative, so it seems to carry the physical sign already \
                 (if so, rename the column to \"{plain}\")"
            ),
        ));
    }

    Ok((points, imag_mostly_positive))
}

/// One point before sorting; `at` is the file line or the input index.
#[derive(Debug, Clone, Copy)]
struct Point {
    f: f64,
    re: f64,
    im: f64,
    at: usize,
}

/// Stable sort by frequency, so equal frequencies stay in input order.
fn sort_points(points: &mut [Point]) {
    points.sort_by(|a, b| a.f.total_cmp(&b.f));
}

/// Among sorted points, the pair of equal frequencies whose later member
/// comes first in the input, so the first repeat a reader meets is named.
fn first_duplicate(points: &[Point]) -> Option<(Point, Point)> {
    points
        .windows(2)
        .filter(|w| w[0].f.total_cmp(&w[1].f).is_eq())
        .map(|w| (w[0], w[1]))
        .min_by_key(|(_, later)| later.at)
}

/// Which fields of a table hold the spectrum.
struct Choice {
    columns: [usize; 3],
    /// The third column holds −Z'' (rectangular) or −φ (polar).
    negated: bool,
    polar: bool,
    /// Factors from each column's unit to Hz, Ω, Ω (or degrees).
    factors: [f64; 3],
}

/// The columns of each role in `head`: the user's choice, or the columns
/// whose heading names the role (excluding columns chosen for other roles).
fn role_columns(head: &TableHead, map: &ColumnMap) -> Result<[Vec<usize>; 7]> {
    let mut chosen = [None; 7];
    for (k, role) in ROLES.iter().enumerate() {
        chosen[k] = map.column(head, role)?;
    }
    for (a, ca) in chosen.iter().enumerate() {
        for (b, cb) in chosen.iter().enumerate().skip(a + 1) {
            if let (Some(x), Some(y)) = (ca, cb)
                && x == y
            {
                return Err(head.error(
                    head.header_line,
                    format!(
                        "--column {} and --column {} both choose column #{} (\"{}\")",
                        ROLES[a],
                        ROLES[b],
                        x + 1,
                        head.column_name(*x)
                    ),
                ));
            }
        }
    }
    let taken: Vec<usize> = chosen.iter().flatten().copied().collect();
    let mut out: [Vec<usize>; 7] = Default::default();
    for (k, names) in ROLE_NAMES.iter().enumerate() {
        out[k] = match chosen[k] {
            Some(c) => vec![c],
            None => head
                .find_columns(names)
                .into_iter()
                .filter(|c| !taken.contains(c))
                .collect(),
        };
    }
    Ok(out)
}

/// Whether `head` names a frequency column and at least one impedance
/// column: the test that finds the header below a block of free text.
fn names_a_spectrum(head: &TableHead, map: &ColumnMap) -> bool {
    match role_columns(head, map) {
        Ok(cols) => !cols[0].is_empty() && cols[1..].iter().any(|c| !c.is_empty()),
        Err(_) => false,
    }
}

fn choose_columns(table: &TableHead, map: &ColumnMap) -> Result<Choice> {
    let header_err = |msg: String| table.error(table.header_line, msg);
    let looks_numeric = table.looks_like_data();
    if looks_numeric {
        return Err(header_err(format!(
            "\"{}\" looks like data, not a header (add a header line such as \"{CANONICAL_HEADER}\")",
            excerpt(&table.header_text)
        )));
    }
    let missing = |what: &str, role: &str, example: &str| {
        let hint = if table.header.len() == 1 {
            ", with columns separated by commas, semicolons or tabs"
        } else {
            ""
        };
        header_err(format!(
            "no {what} column found in header \"{}\" (expected e.g. \"{example}\"{hint}; \
             or choose it with --column {role}=HEADING)",
            excerpt(&table.header_text)
        ))
    };

    let [freq, re, im, neg, modulus, phase, neg_phase] = role_columns(table, map)?;

    if freq.is_empty() {
        return Err(missing("frequency", "frequency", CANONICAL_HEADER));
    }
    let (lists, negated, polar) = if !re.is_empty() && !im.is_empty() {
        ([(&freq, 0), (&re, 1), (&im, 2)], false, false)
    } else if !re.is_empty() && !neg.is_empty() {
        ([(&freq, 0), (&re, 1), (&neg, 3)], true, false)
    } else if !modulus.is_empty() && !phase.is_empty() {
        ([(&freq, 0), (&modulus, 4), (&phase, 5)], false, true)
    } else if !modulus.is_empty() && !neg_phase.is_empty() {
        ([(&freq, 0), (&modulus, 4), (&neg_phase, 6)], true, true)
    } else if !re.is_empty() {
        return Err(missing("imaginary-part", "imag", CANONICAL_HEADER));
    } else if !modulus.is_empty() {
        return Err(missing("phase", "phase", POLAR_HEADER));
    } else if !phase.is_empty() || !neg_phase.is_empty() {
        return Err(missing("modulus", "modulus", POLAR_HEADER));
    } else {
        return Err(missing("real-part", "real", CANONICAL_HEADER));
    };

    let mut columns = [0; 3];
    let mut factors = [1.0; 3];
    for (k, (list, role)) in lists.into_iter().enumerate() {
        let what = ROLE_WORDS[role];
        let col = match list[..] {
            [only] => only,
            [first, second, ..] => {
                return Err(header_err(format!(
                    "columns \"{}\" and \"{}\" both name the {what} (remove or rename one of \
                     them, or choose one with --column {}=HEADING)",
                    table.column_name(first),
                    table.column_name(second),
                    ROLES[role]
                )));
            }
            [] => unreachable!("the layout is chosen only from non-empty column lists"),
        };
        columns[k] = col;
        let name = table.column_name(col);
        let given = map.unit(ROLES[role]);
        let unit = given.map(str::to_string).or_else(|| split_unit(name).1);
        let Some(unit) = unit else { continue };
        let bases = ROLE_UNITS[role];
        let source = if given.is_some() {
            format!("--unit {}", ROLES[role])
        } else {
            format!("column \"{name}\"")
        };
        factors[k] = match unit_factor(&unit, bases) {
            UnitReading::Factor(f) => f,
            UnitReading::Ambiguous if given.is_some() => {
                return Err(Error::Config(format!(
                    "--unit {}={unit}: ambiguous, milli or mega? (write the prefix as m or M \
                     with the unit in its usual case, e.g. mHz or MHz)",
                    ROLES[role]
                )));
            }
            UnitReading::Unknown if given.is_some() => {
                return Err(Error::Config(format!(
                    "--unit {}={unit}: not a unit of the {what} (use one of {})",
                    ROLES[role],
                    unit_examples(bases)
                )));
            }
            UnitReading::Ambiguous => {
                return Err(header_err(format!(
                    "unit \"{unit}\" in {source} is ambiguous: milli or mega? \
                     (write the prefix as m or M with the unit in its usual case, \
                     or give --unit {}=UNIT)",
                    ROLES[role]
                )));
            }
            UnitReading::Unknown => {
                return Err(header_err(format!(
                    "unsupported unit \"{unit}\" in {source} (use one of {}; \
                     or give --unit {}=UNIT)",
                    unit_examples(bases),
                    ROLES[role]
                )));
            }
        };
    }
    Ok(Choice {
        columns,
        negated,
        polar,
        factors,
    })
}

/// At most this many data rows in one series file (every spectrum of it
/// is held in memory while it is read: about 32 bytes a row, 640 MB at the
/// limit). A larger campaign is given as one file per spectrum.
pub const MAX_SERIES_ROWS: usize = 20_000_000;

/// One spectrum of a series file: the rows that share a value of the
/// naming column.
#[derive(Debug)]
pub struct SeriesEntry {
    /// The naming column's text for these rows.
    pub key: String,
    /// The naming column's text as a number, when it is one.
    pub label: Option<f64>,
    /// 1-based line of the spectrum's first row.
    pub first_line: usize,
    /// The spectrum, or why its rows do not make one (the error names the
    /// file and line).
    pub spectrum: Result<Spectrum>,
}

/// Reads a long file that holds many spectra, one after another or
/// interleaved, with a column (`by`: a heading, or `#N` counted from 1)
/// naming the spectrum each row belongs to (a cycle number, a state of
/// charge, a temperature). The spectra come in order of their first row.
///
/// A spectrum whose rows cannot be used (a bad value, a repeated
/// frequency, too few points) gets its error and the others are read on;
/// a file without a usable header or naming column, or a row the table
/// reader refuses, fails the whole file.
pub fn read_spectrum_series(
    path: &Path,
    map: &ColumnMap,
    by: &str,
) -> Result<(Vec<SeriesEntry>, SpectrumLayout)> {
    let file = File::open(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })?;
    parse_spectrum_series(BufReader::new(file), path, map, by)
}

/// Like [`read_spectrum_series`], from `reader`; `path` only labels errors.
pub fn parse_spectrum_series<R: BufRead>(
    reader: R,
    path: &Path,
    map: &ColumnMap,
    by: &str,
) -> Result<(Vec<SeriesEntry>, SpectrumLayout)> {
    let (mut table, choice) = open_spectrum_table(reader, path, map)?;
    let by_col = series_column(&table, by)?;
    if choice.columns.contains(&by_col) {
        return Err(table.error(
            table.header_line,
            format!(
                "--by column \"{}\" is one of the spectrum's own columns",
                table.column_name(by_col)
            ),
        ));
    }
    struct Group {
        key: String,
        first_line: usize,
        points: std::result::Result<Vec<Point>, Error>,
    }
    let mut groups: Vec<Group> = Vec::new();
    let mut index: std::collections::HashMap<String, usize> = std::collections::HashMap::new();
    let mut rows = 0usize;
    while let Some(row) = table.next_row()? {
        rows += 1;
        if rows > MAX_SERIES_ROWS {
            return Err(table.error(
                row.line,
                format!(
                    "more than {MAX_SERIES_ROWS} rows in one series file (give the spectra as \
                     separate files)"
                ),
            ));
        }
        let key = row.field(by_col).trim().to_string();
        if key.is_empty() {
            return Err(table.error(
                row.line,
                format!(
                    "the --by column \"{}\" is empty: every row must name its spectrum",
                    table.column_name(by_col)
                ),
            ));
        }
        let g = *index.entry(key.clone()).or_insert_with(|| {
            groups.push(Group {
                key,
                first_line: row.line,
                points: Ok(Vec::new()),
            });
            groups.len() - 1
        });
        let group = &mut groups[g];
        if let Ok(points) = &mut group.points {
            if points.len() == MAX_POINTS {
                group.points = Err(table.error(
                    row.line,
                    format!("more than {MAX_POINTS} points in one spectrum"),
                ));
            } else {
                match row_point(&table, &row, &choice) {
                    Ok(p) => points.push(p),
                    Err(e) => group.points = Err(e),
                }
            }
        }
    }
    let mut any_imag_positive = false;
    let entries: Vec<SeriesEntry> = groups
        .into_iter()
        .map(|g| {
            let spectrum = g.points.and_then(|points| {
                let (points, imag) =
                    finish_points(points, &table, path, &choice).map_err(|e| match e {
                        Error::TooFewPoints { needed, found, .. } => table.error(
                            g.first_line,
                            format!(
                                "spectrum \"{}\" has {found} points; at least {needed} are needed",
                                g.key
                            ),
                        ),
                        e => e,
                    })?;
                any_imag_positive |= imag;
                Ok(Spectrum::from_sorted(&points))
            });
            let label = parse_label(&g.key);
            SeriesEntry {
                key: g.key,
                label,
                first_line: g.first_line,
                spectrum,
            }
        })
        .collect();
    if entries.is_empty() {
        return Err(Error::TooFewPoints {
            path: path.to_path_buf(),
            needed: MIN_POINTS,
            found: 0,
        });
    }
    let layout = layout_of(&table, &choice, any_imag_positive, table.encoding());
    Ok((entries, layout))
}

/// A naming column's text as a number: a plain decimal number, with a
/// decimal comma accepted; `None` otherwise.
fn parse_label(key: &str) -> Option<f64> {
    let t = key.trim();
    t.parse::<f64>()
        .ok()
        .or_else(|| t.replacen(',', ".", 1).parse::<f64>().ok())
        .filter(|v| v.is_finite())
}

/// The column `by` names: `#N` (from 1) or a heading, matched as written,
/// then by its normalised name.
fn series_column(table: &TableHead, by: &str) -> Result<usize> {
    let by = by.trim();
    let n = table.header.len();
    if let Some(num) = by.strip_prefix('#') {
        return match num.parse::<usize>() {
            Ok(k) if (1..=n).contains(&k) => Ok(k - 1),
            _ => Err(table.error(
                table.header_line,
                format!("--by {by}: the header has columns #1 to #{n}"),
            )),
        };
    }
    let exact: Vec<usize> = (0..n).filter(|&i| table.header[i].trim() == by).collect();
    let found = if exact.is_empty() {
        let want = crate::io::table::normalize_name(by);
        (0..n)
            .filter(|&i| crate::io::table::normalize_name(&table.header[i]) == want)
            .collect()
    } else {
        exact
    };
    match found.as_slice() {
        [c] => Ok(*c),
        [] => Err(table.error(
            table.header_line,
            format!(
                "no column \"{by}\" for --by; the header has: {}",
                table.header.join(", ")
            ),
        )),
        _ => Err(table.error(
            table.header_line,
            format!("more than one column is called \"{by}\"; give --by #N"),
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    const P: &str = "cell_a.csv";

    fn parse(bytes: &[u8]) -> Result<(Spectrum, SpectrumLayout)> {
        parse_spectrum_with_layout(bytes, Path::new(P))
    }

    fn err_text(bytes: &[u8]) -> String {
        parse(bytes)
            .expect_err("input should be rejected")
            .to_string()
    }

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-9 * (1.0 + b.abs())
    }

    fn assert_all_close(got: &[f64], want: &[f64]) {
        assert_eq!(got.len(), want.len(), "{got:?} vs {want:?}");
        for (g, w) in got.iter().zip(want) {
            assert!(close(*g, *w), "{got:?} vs {want:?}");
        }
    }

    /// Five capacitive points in descending frequency, as instruments sweep.
    const ROWS: &str = "1000,10,-5\n100,11,-6\n10,12,-7\n1,13,-3\n0.1,14,-1\n";

    #[test]
    fn reads_canonical_file_with_bom_crlf_comments_and_spaces() {
        let (s, layout) = parse(
            b"\xEF\xBB\xBFfrequency_hz;z_re_ohm;z_im_ohm\r\n# comment\r\n\r\n 1000 ; 10 ; -5 \r\n\
              100;11;-6\r\n  # another\r\n10;12;-7\r\n1;13;-3\r\n0.1;14;-1\r\n",
        )
        .unwrap();
        assert_all_close(&s.frequency_hz, &[0.1, 1.0, 10.0, 100.0, 1000.0]);
        assert_all_close(&s.z_re_ohm, &[14.0, 13.0, 12.0, 11.0, 10.0]);
        assert_all_close(&s.z_im_ohm, &[-1.0, -3.0, -7.0, -6.0, -5.0]);
        assert_eq!(s.len(), 5);
        assert!(!s.is_empty());
        assert_eq!(
            layout,
            SpectrumLayout {
                delimiter: ';',
                header_line: 1,
                columns: [0, 1, 2],
                column_names: ["frequency_hz".into(), "z_re_ohm".into(), "z_im_ohm".into()],
                negated_imag: false,
                polar: false,
                imag_mostly_positive: false,
                ignored_columns: vec![],
                negated_phase: false,
                factors: [1.0; 3],
                preamble: None,
                encoding: TextEncoding::Utf8,
            }
        );
    }

    #[test]
    fn columns_in_any_order_with_extras_ignored() {
        let text = "idx\tZ'' (Ohm)\tTime/s\tFreq (Hz)\tZ' [Ohm]\n\
                    1\t-5\t0\t1e3\t10\n2\t-6\t1\t1e2\t11\n3\t-7\t2\t1e1\t12\n\
                    4\t-3\t3\t1\t13\n5\t-1\t4\t0.1\t14\n";
        let (s, layout) = parse(text.as_bytes()).unwrap();
        assert_all_close(&s.frequency_hz, &[0.1, 1.0, 10.0, 100.0, 1000.0]);
        assert_all_close(&s.z_re_ohm, &[14.0, 13.0, 12.0, 11.0, 10.0]);
        assert_all_close(&s.z_im_ohm, &[-1.0, -3.0, -7.0, -6.0, -5.0]);
        assert_eq!(layout.delimiter, '\t');
        assert_eq!(layout.columns, [3, 4, 1]);
        assert_eq!(layout.column_names[1], "Z' [Ohm]");
        assert_eq!(layout.ignored_columns, ["idx", "Time/s"]);
    }

    #[test]
    fn accepts_every_documented_header_name() {
        for f in FREQUENCY_NAMES {
            for re in REAL_NAMES {
                for im in IMAG_NAMES {
                    let text = format!("{}, {re} ,{im}\n{ROWS}", f.to_uppercase());
                    let s = parse_spectrum(text.as_bytes(), Path::new(P))
                        .unwrap_or_else(|e| panic!("{f},{re},{im}: {e}"));
                    assert_all_close(&s.z_im_ohm, &[-1.0, -3.0, -7.0, -6.0, -5.0]);
                }
            }
        }
        for neg in NEG_IMAG_NAMES {
            let text = format!("f,re,\"{neg}\"\n{}", ROWS.replace(",-", ","));
            let (s, layout) = parse(text.as_bytes()).unwrap_or_else(|e| panic!("{neg}: {e}"));
            assert!(layout.negated_imag, "{neg}");
            assert_all_close(&s.z_im_ohm, &[-1.0, -3.0, -7.0, -6.0, -5.0]);
        }
        for m in MODULUS_NAMES {
            for ph in PHASE_NAMES {
                let text = format!("f,{m},{ph}\n1,1,0\n2,1,0\n3,1,0\n4,1,0\n5,1,0\n");
                let (_, layout) = parse(text.as_bytes()).unwrap_or_else(|e| panic!("{m}: {e}"));
                assert!(layout.polar, "{m},{ph}");
            }
        }
    }

    #[test]
    fn negated_imaginary_column_is_converted() {
        let text = format!("Freq/Hz,Z'/Ohm,-Z''/Ohm\n{}", ROWS.replace(",-", ","));
        let (s, layout) = parse(text.as_bytes()).unwrap();
        assert!(layout.negated_imag);
        assert!(!layout.imag_mostly_positive);
        assert_all_close(&s.z_im_ohm, &[-1.0, -3.0, -7.0, -6.0, -5.0]);
    }

    #[test]
    fn negated_column_holding_physical_sign_is_rejected() {
        let text = format!("# exported\nf,re,-Z''\n{ROWS}");
        assert_eq!(
            err_text(text.as_bytes()),
            "cell_a.csv:2: column \"-Z''\" should hold the negated imaginary part, but 5 of 5 \
             values are negative, so it seems to carry the physical sign already \
             (if so, rename the column to \"z_im_ohm\")"
        );
    }

    #[test]
    fn mostly_positive_plain_imaginary_is_accepted_and_flagged() {
        let text = "f,re,im\n1,1,1\n2,1,2\n3,1,3\n4,1,-1\n5,1,-2\n";
        let (s, layout) = parse(text.as_bytes()).unwrap();
        assert!(layout.imag_mostly_positive);
        assert_all_close(&s.z_im_ohm, &[1.0, 2.0, 3.0, -1.0, -2.0]);
        // Two of five positive is not "mostly".
        let text = "f,re,im\n1,1,1\n2,1,2\n3,1,-3\n4,1,-1\n5,1,-2\n";
        assert!(!parse(text.as_bytes()).unwrap().1.imag_mostly_positive);
    }

    #[test]
    fn polar_columns_are_converted_from_degrees() {
        let text = "frequency_hz,|Z| (Ohm),Phase (deg)\n\
                    1,10,-30\n2,10,-90\n3,2,0\n4,4,45\n5,1,-180\n";
        let (s, layout) = parse(text.as_bytes()).unwrap();
        assert!(layout.polar);
        assert!(!layout.negated_imag);
        assert_all_close(
            &s.z_re_ohm,
            &[8.660_254_037_844_386, 0.0, 2.0, 2.0 * 2f64.sqrt(), -1.0],
        );
        assert_all_close(&s.z_im_ohm, &[-5.0, -10.0, 0.0, 2.0 * 2f64.sqrt(), 0.0]);
        assert!((s.z_re_ohm[0] - 8.660_254).abs() < 1e-6);
    }

    #[test]
    fn rectangular_columns_win_over_polar_ones() {
        let text =
            "f,Z',Z'',|Z|,phase\n1,1,-1,99,0\n2,1,-1,99,0\n3,1,-1,99,0\n4,1,-1,99,0\n5,1,-1,99,0\n";
        let (s, layout) = parse(text.as_bytes()).unwrap();
        assert!(!layout.polar);
        assert_eq!(layout.ignored_columns, ["|Z|", "phase"]);
        assert_all_close(&s.z_re_ohm, &[1.0; 5]);
    }

    #[test]
    fn missing_columns_are_named_at_the_header() {
        assert_eq!(
            err_text(b"freq,re\n1,2\n"),
            "cell_a.csv:1: no imaginary-part column found in header \"freq,re\" \
             (expected e.g. \"frequency_hz,z_re_ohm,z_im_ohm\"; or choose it with --column imag=HEADING)"
        );
        assert_eq!(
            err_text(b"# c\nhz,re,im\n"),
            "cell_a.csv:2: no frequency column found in header \"hz,re,im\" \
             (expected e.g. \"frequency_hz,z_re_ohm,z_im_ohm\"; or choose it with --column frequency=HEADING)"
        );
        assert_eq!(
            err_text(b"f,a,im\n"),
            "cell_a.csv:1: no real-part column found in header \"f,a,im\" \
             (expected e.g. \"frequency_hz,z_re_ohm,z_im_ohm\"; or choose it with --column real=HEADING)"
        );
        assert_eq!(
            err_text(b"f,|Z|\n"),
            "cell_a.csv:1: no phase column found in header \"f,|Z|\" \
             (expected e.g. \"frequency_hz,z_mod_ohm,z_phase_deg\"; or choose it with --column phase=HEADING)"
        );
        assert_eq!(
            err_text(b"f;phase\n"),
            "cell_a.csv:1: no modulus column found in header \"f;phase\" \
             (expected e.g. \"frequency_hz,z_mod_ohm,z_phase_deg\"; or choose it with --column modulus=HEADING)"
        );
        assert_eq!(
            err_text(b"frequency_hz z_re_ohm z_im_ohm\n"),
            "cell_a.csv:1: no frequency column found in header \"frequency_hz z_re_ohm z_im_ohm\" \
             (expected e.g. \"frequency_hz,z_re_ohm,z_im_ohm\", with columns separated by \
             commas, semicolons or tabs; or choose it with --column frequency=HEADING)"
        );
        assert_eq!(
            err_text(b"1000,10,-5\n100,11,-6\n"),
            "cell_a.csv:1: \"1000,10,-5\" looks like data, not a header \
             (add a header line such as \"frequency_hz,z_re_ohm,z_im_ohm\")"
        );
    }

    #[test]
    fn ambiguous_columns_and_bad_units_are_rejected() {
        assert_eq!(
            err_text(b"f,re,im,freq\n"),
            "cell_a.csv:1: columns \"f\" and \"freq\" both name the frequency \
             (remove or rename one of them, or choose one with --column frequency=HEADING)"
        );
        assert_eq!(
            err_text(b"Freq (GHz),re,im\n"),
            "cell_a.csv:1: unsupported unit \"GHz\" in column \"Freq (GHz)\" \
             (use one of Hz, mHz, kHz, MHz; or give --unit frequency=UNIT)"
        );
        assert_eq!(
            err_text(b"f,Z' (Ohm cm2),im\n"),
            "cell_a.csv:1: unsupported unit \"Ohm cm2\" in column \"Z' (Ohm cm2)\" \
             (use one of ohm, uohm, mohm, kohm, Mohm, Gohm; or give --unit real=UNIT)"
        );
        assert_eq!(
            err_text(b"f (MHZ),re,im\n"),
            "cell_a.csv:1: unit \"MHZ\" in column \"f (MHZ)\" is ambiguous: milli or mega? \
             (write the prefix as m or M with the unit in its usual case, or give \
             --unit frequency=UNIT)"
        );
        let ok = format!("f (HZ),re (Ω),im [ohms]\n{ROWS}");
        assert!(parse(ok.as_bytes()).is_ok());
    }

    /// Headings and number formats of instrument and spreadsheet exports,
    /// each read to the same spectrum as the canonical file.
    #[test]
    fn reads_what_instruments_and_spreadsheets_write() {
        let want_f = [0.1, 1.0, 10.0, 100.0, 1000.0];
        let want_re = [14.0, 13.0, 12.0, 11.0, 10.0];
        let want_im = [-1.0, -3.0, -7.0, -6.0, -5.0];
        let check = |bytes: &[u8], what: &str| -> SpectrumLayout {
            let (s, layout) = parse(bytes).unwrap_or_else(|e| panic!("{what}: {e}"));
            assert_all_close(&s.frequency_hz, &want_f);
            assert_all_close(&s.z_re_ohm, &want_re);
            assert_all_close(&s.z_im_ohm, &want_im);
            layout
        };
        // Semicolons and decimal commas (European spreadsheets).
        check(
            b"Frequency/Hz;Z'/Ohm;Z''/Ohm\n1000,0;10,0;-5,0\n100;11;-6\n1,0e1;12;-7\n1;13;-3\n0,1;14;-1\n",
            "decimal comma",
        );
        // Unit prefixes, ISO 80000-1 quantity/unit headings, (Z) quantities.
        let layout = check(
            b"f/kHz\tRe(Z)/mOhm\t-Im(Z)/mOhm\n1\t10000\t5000\n0,1\t11000\t6000\n0,01\t12000\t7000\n\
              0,001\t13000\t3000\n0,0001\t14000\t1000\n",
            "prefixes",
        );
        assert_eq!(layout.factors, [1e3, 1e-3, 1e-3]);
        assert!(layout.negated_imag);
        check(
            "Freq (mHz),Z' (k\u{3a9}),Z'' (k\u{3a9})\n1e6,0.010,-0.005\n1e5,0.011,-0.006\n\
             1e4,0.012,-0.007\n1e3,0.013,-0.003\n1e2,0.014,-0.001\n"
                .as_bytes(),
            "mHz and kΩ",
        );
        // A free-text block above the header, without '#'.
        let layout = check(
            b"Instrument export\nOperator: A. Smith, shift 2\nArea: 1,0 cm2\n\nfreq,re,im\n\
              1000,10,-5\n100,11,-6\n10,12,-7\n1,13,-3\n0.1,14,-1\n",
            "preamble",
        );
        assert_eq!(layout.preamble, Some((1, 3)));
        assert_eq!(layout.header_line, 5);
        // A trailing delimiter on every data row, but not on the header.
        check(
            b"f;re;im\n1000;10;-5;\n100;11;-6;\n10;12;-7;\n1;13;-3;\n0.1;14;-1;\n",
            "trailing delimiter",
        );
        // Latin-1 (a degree sign and a micro sign as single bytes).
        let polar = |ph: &str, m: f64, sign: f64| -> Vec<u8> {
            let mut out = Vec::new();
            for ((f, re), im) in want_f.iter().zip(want_re).zip(want_im) {
                let modulus = (re * re + im * im).sqrt() * m;
                let phi = sign * im.atan2(re).to_degrees();
                out.extend(format!("{f};{modulus:.15e};{phi:.15e}\n").into_bytes());
            }
            let mut text = ph.as_bytes().to_vec();
            text.extend(out);
            text
        };
        let mut latin1 = b"Freq/Hz;|Z|/\xB5Ohm;Phase/\xB0\n".to_vec();
        latin1.extend(polar("", 1e6, 1.0));
        let layout = check(&latin1, "latin-1");
        assert_eq!(layout.encoding, TextEncoding::Latin1);
        assert_eq!(layout.column_names[2], "Phase/\u{b0}");
        // A negated-phase column, in radians.
        let mut neg = polar("f;|Z|;-phase (rad)\n", 1.0, -1.0);
        let text = String::from_utf8(neg.clone()).unwrap();
        let head_len = "f;|Z|;-phase (rad)\n".len();
        let mut rows = String::new();
        for line in text[head_len..].lines() {
            let v: Vec<&str> = line.split(';').collect();
            let rad: f64 = v[2].parse::<f64>().unwrap().to_radians();
            rows.push_str(&format!("{};{};{rad:.15e}\n", v[0], v[1]));
        }
        neg = format!("f;|Z|;-phase (rad)\n{rows}").into_bytes();
        let layout = check(&neg, "negated phase in radians");
        assert!(layout.negated_phase && layout.polar);
        // UTF-16 with and without a byte-order mark, both byte orders.
        let text = format!("f,re,im\n{ROWS}");
        let le: Vec<u8> = text.encode_utf16().flat_map(u16::to_le_bytes).collect();
        let be: Vec<u8> = text.encode_utf16().flat_map(u16::to_be_bytes).collect();
        for (bytes, enc) in [
            ([&[0xFF, 0xFE][..], &le].concat(), TextEncoding::Utf16Le),
            (le.clone(), TextEncoding::Utf16Le),
            ([&[0xFE, 0xFF][..], &be].concat(), TextEncoding::Utf16Be),
            (be.clone(), TextEncoding::Utf16Be),
        ] {
            assert_eq!(check(&bytes, "utf-16").encoding, enc);
        }
    }

    #[test]
    fn column_choices_settle_ambiguity() {
        let text = format!("f,re,im,Zre\n{}", ROWS.replace('\n', ",0\n"));
        assert!(
            err_text(text.as_bytes()).contains("or choose one with --column real=HEADING"),
            "{}",
            err_text(text.as_bytes())
        );
        let mut map = ColumnMap::default();
        map.add_column("real=re").unwrap();
        let (s, layout) = parse_spectrum_with(text.as_bytes(), Path::new(P), &map).unwrap();
        assert_eq!(layout.columns, [0, 1, 2]);
        assert_all_close(&s.z_re_ohm, &[14.0, 13.0, 12.0, 11.0, 10.0]);
        let mut map = ColumnMap::default();
        map.add_column("real=#4").unwrap();
        let (s, _) = parse_spectrum_with(text.as_bytes(), Path::new(P), &map).unwrap();
        assert_all_close(&s.z_re_ohm, &[0.0; 5]);
        // A heading whose unit case is ambiguous, settled by --unit.
        let text = format!("f (MHZ),re,im\n{ROWS}");
        let mut map = ColumnMap::default();
        map.add_unit("frequency=mHz").unwrap();
        let (s, _) = parse_spectrum_with(text.as_bytes(), Path::new(P), &map).unwrap();
        assert_all_close(&s.frequency_hz, &[1e-4, 1e-3, 1e-2, 1e-1, 1.0]);
        // Unknown roles are refused with the list of known ones.
        let mut map = ColumnMap::default();
        map.add_column("time=#1").unwrap();
        assert_eq!(
            parse_spectrum_with(text.as_bytes(), Path::new(P), &map)
                .unwrap_err()
                .to_string(),
            "--column: unknown role \"time\" for this input (use one of frequency, real, imag, \
             neg-imag, modulus, phase, neg-phase)"
        );
    }

    #[test]
    fn headerless_free_text_and_limits_are_reported() {
        assert_eq!(
            err_text(b"Instrument export\nOperator: A. Smith\n1000,10,-5\n100,11,-6\n"),
            "cell_a.csv:1: no header line found: lines 1-2 name no frequency and impedance \
             columns, and line 3 already holds numbers (first line read: \"Instrument export\"; \
             expected a header line such as \"frequency_hz,z_re_ohm,z_im_ohm\")"
        );
        let mut big = String::from("f,re,im\n");
        for k in 0..=MAX_POINTS {
            big.push_str(&format!("{},1,-1\n", k + 1));
        }
        assert_eq!(
            err_text(big.as_bytes()),
            format!(
                "cell_a.csv:{}: more than 100000 points: taumap inverts at most 100000 \
                 frequencies (thin the file or split it)",
                MAX_POINTS + 2
            )
        );
        let long = format!(
            "f,re,im\n{}\n",
            "7".repeat(crate::io::table::MAX_LINE_BYTES + 10)
        );
        assert_eq!(
            err_text(long.as_bytes()),
            "cell_a.csv:2: line is longer than 1048576 bytes (it starts \
             \"7777777777777777777777777777777777777777...\"); a table row is a short line of numbers"
        );
        assert_eq!(
            err_text(b"PK\x03\x04\x14\x00\x06\x00"),
            "cell_a.csv:1: control character U+0003 at column 3: this looks like a binary file \
             (export the data as delimited text, e.g. CSV)"
        );
    }

    #[test]
    fn bad_values_name_line_and_column() {
        let with = |line: &str| format!("frequency_hz,z_re_ohm,z_im_ohm\n1,1,-1\n{line}\n");
        assert_eq!(
            err_text(with("2,1.2e,-1").as_bytes()),
            "cell_a.csv:3: cannot read \"1.2e\" as a number (column z_re_ohm)"
        );
        assert_eq!(
            err_text(with("2,inf,-1").as_bytes()),
            "cell_a.csv:3: value \"inf\" is not finite (column z_re_ohm)"
        );
        assert_eq!(
            err_text(with("2,1,NaN").as_bytes()),
            "cell_a.csv:3: value \"NaN\" is not finite (column z_im_ohm)"
        );
        assert_eq!(
            err_text(with("0,1,-1").as_bytes()),
            "cell_a.csv:3: frequency must be positive, found 0 (column frequency_hz)"
        );
        assert_eq!(
            err_text(with("-5e1,1,-1").as_bytes()),
            "cell_a.csv:3: frequency must be positive, found -5e1 (column frequency_hz)"
        );
        assert_eq!(
            err_text(with("2,1").as_bytes()),
            "cell_a.csv:3: expected 3 fields, found 2"
        );
        assert_eq!(
            err_text(b"f,mod,phase\n1,-3,0\n"),
            "cell_a.csv:2: modulus must not be negative, found -3 (column mod)"
        );
        assert_eq!(
            err_text(b"f,re,im\n1,1,-1\n\xE9\n"),
            "cell_a.csv:3: expected 3 fields, found 1"
        );
    }

    #[test]
    fn duplicate_frequencies_name_both_lines() {
        // Header on line 1, data on lines 2..=13; line 12 repeats line 7.
        let mut text = String::from("frequency_hz,z_re_ohm,z_im_ohm\n");
        for f in [1, 2, 3, 4, 5, 1000, 6, 7, 8, 9] {
            text.push_str(&format!("{f},1,-1\n"));
        }
        text.push_str("1e3,1,-1\n10,1,-1\n");
        assert_eq!(
            err_text(text.as_bytes()),
            "cell_a.csv:12: duplicate frequency 1000 Hz (also on line 7)"
        );
    }

    #[test]
    fn too_few_points() {
        let e = parse(b"f,re,im\n1,1,-1\n2,1,-1\n\n# c\n3,1,-1\n4,1,-1\n").unwrap_err();
        assert!(matches!(
            e,
            Error::TooFewPoints {
                needed: 5,
                found: 4,
                ..
            }
        ));
        assert_eq!(
            e.to_string(),
            "cell_a.csv: need at least 5 data points, found 4"
        );
        assert_eq!(
            err_text(b"f,re,im\n"),
            "cell_a.csv: need at least 5 data points, found 0"
        );
    }

    #[test]
    fn empty_file() {
        assert_eq!(
            err_text(b""),
            "cell_a.csv:1: file is empty (expected a header line such as \
             \"frequency_hz,z_re_ohm,z_im_ohm\")"
        );
    }

    #[test]
    fn new_sorts_and_validates() {
        let s = Spectrum::new(
            vec![10.0, 1.0, 100.0],
            vec![1.0, 2.0, 3.0],
            vec![-1.0, -2.0, -3.0],
        )
        .unwrap();
        assert_all_close(&s.frequency_hz, &[1.0, 10.0, 100.0]);
        assert_all_close(&s.z_re_ohm, &[2.0, 1.0, 3.0]);
        assert_all_close(&s.z_im_ohm, &[-2.0, -1.0, -3.0]);

        let msg = |f: Vec<f64>, re: Vec<f64>, im: Vec<f64>| {
            Spectrum::new(f, re, im).unwrap_err().to_string()
        };
        assert_eq!(
            msg(vec![1.0, 2.0], vec![1.0], vec![1.0, 1.0]),
            "2 frequencies but 1 real parts"
        );
        assert_eq!(
            msg(vec![1.0], vec![1.0], vec![]),
            "1 frequencies but 0 imaginary parts"
        );
        assert_eq!(
            msg(vec![1.0, 0.0], vec![1.0; 2], vec![1.0; 2]),
            "frequency_hz[1] must be positive and finite, found 0"
        );
        assert_eq!(
            msg(vec![f64::INFINITY], vec![1.0], vec![1.0]),
            "frequency_hz[0] must be positive and finite, found inf"
        );
        assert_eq!(
            msg(vec![1.0], vec![f64::NAN], vec![1.0]),
            "z_re_ohm[0] must be finite, found NaN"
        );
        assert_eq!(
            msg(vec![1.0], vec![1.0], vec![f64::NEG_INFINITY]),
            "z_im_ohm[0] must be finite, found -inf"
        );
        assert_eq!(
            msg(vec![5.0, 1.0, 5.0], vec![1.0; 3], vec![1.0; 3]),
            "duplicate frequency 5 Hz (indices 0 and 2)"
        );
        assert!(Spectrum::new(vec![], vec![], vec![]).unwrap().is_empty());
    }

    #[test]
    fn scaled_multiplies_impedance_only() {
        let s = Spectrum::new(vec![1.0, 2.0], vec![1.0, 2.0], vec![-3.0, 4.0]).unwrap();
        let t = s.scaled(2.5);
        assert_all_close(&t.frequency_hz, &[1.0, 2.0]);
        assert_all_close(&t.z_re_ohm, &[2.5, 5.0]);
        assert_all_close(&t.z_im_ohm, &[-7.5, 10.0]);
    }

    #[test]
    fn read_spectrum_opens_files() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("cell_b.csv");
        std::fs::write(&path, format!("{CANONICAL_HEADER}\n{ROWS}")).unwrap();
        let s = read_spectrum(&path).unwrap();
        assert_eq!(s.len(), 5);
        let (_, layout) = read_spectrum_with_layout(&path).unwrap();
        assert_eq!(layout.columns, [0, 1, 2]);

        let missing = dir.path().join("nope.csv");
        let e = read_spectrum(&missing).unwrap_err();
        assert!(matches!(e, Error::Io { .. }));
        assert!(
            e.to_string()
                .starts_with(&format!("{}: ", missing.display()))
        );
    }

    fn token() -> impl Strategy<Value = String> {
        prop_oneof![
            Just("1e3".to_string()),
            Just("-5".to_string()),
            Just("0".to_string()),
            Just("inf".to_string()),
            Just("nan".to_string()),
            Just(String::new()),
            Just("1.2e".to_string()),
            Just("\"".to_string()),
            Just("\"3\"".to_string()),
            Just("# x".to_string()),
            Just("\u{00e9}".to_string()),
            (-1e6f64..1e6).prop_map(|v| v.to_string()),
            (1u32..50).prop_map(|v| v.to_string()),
        ]
    }

    fn header_name() -> impl Strategy<Value = String> {
        let names: Vec<&'static str> = FREQUENCY_NAMES
            .iter()
            .chain(REAL_NAMES)
            .chain(IMAG_NAMES)
            .chain(NEG_IMAG_NAMES)
            .chain(MODULUS_NAMES)
            .chain(PHASE_NAMES)
            .chain(&["x", "Freq (kHz)", "Phase (rad)", ""])
            .copied()
            .collect();
        proptest::sample::select(names).prop_map(str::to_string)
    }

    proptest! {
        #[test]
        fn arbitrary_bytes_never_panic(bytes in proptest::collection::vec(any::<u8>(), 0..400)) {
            let _ = parse_spectrum(&bytes[..], Path::new(P));
        }

        #[test]
        fn near_valid_text_never_panics(
            header in proptest::collection::vec(header_name(), 1..5),
            delim in proptest::sample::select(vec![",", ";", "\t", " "]),
            rows in proptest::collection::vec(proptest::collection::vec(token(), 0..5), 0..10),
            eol in proptest::sample::select(vec!["\n", "\r\n", "\r"]),
        ) {
            let mut text = header.join(delim);
            for row in &rows {
                text.push_str(eol);
                text.push_str(&row.join(delim));
            }
            if let Ok(s) = parse_spectrum(text.as_bytes(), Path::new(P)) {
                prop_assert!(s.len() >= MIN_POINTS);
                prop_assert!(s.frequency_hz.windows(2).all(|w| w[0] < w[1]));
                prop_assert!(s.frequency_hz.iter().all(|f| *f > 0.0));
                prop_assert!(s.z_re_ohm.iter().chain(&s.z_im_ohm).all(|v| v.is_finite()));
            }
        }

        #[test]
        fn row_order_does_not_matter(
            points in proptest::collection::btree_map(1u32..100_000, (-1e3f64..1e3, -1e3f64..-1e-3), 5..30),
            seed in any::<u64>(),
        ) {
            let mut lines: Vec<String> = points
                .iter()
                .map(|(f, (re, im))| format!("{},{re},{im}", f64::from(*f) / 8.0))
                .collect();
            let forward = format!("{CANONICAL_HEADER}\n{}\n", lines.join("\n"));
            // Deterministic shuffle driven by the generated seed.
            let mut state = seed | 1;
            for i in (1..lines.len()).rev() {
                state ^= state << 13;
                state ^= state >> 7;
                state ^= state << 17;
                lines.swap(i, (state % (i as u64 + 1)) as usize);
            }
            let shuffled = format!("{CANONICAL_HEADER}\n{}\n", lines.join("\n"));
            let a = parse_spectrum(forward.as_bytes(), Path::new(P)).unwrap();
            let b = parse_spectrum(shuffled.as_bytes(), Path::new(P)).unwrap();
            prop_assert_eq!(a, b);
        }
    }

    #[test]
    fn a_series_file_splits_by_its_naming_column() {
        let mut text = String::from("# two cells\nsoc;f/kHz;Z'/ohm;Z''/ohm\n");
        for k in 0..6 {
            let f = 0.01 * 10f64.powi(k);
            // Interleaved rows of two spectra; the second has a bad value.
            text.push_str(&format!("0,5;{f};{};-1\n", 2.0 + k as f64));
            let bad = if k == 3 {
                "x".to_string()
            } else {
                format!("{}", 3.0 + k as f64)
            };
            text.push_str(&format!("1;{f};{bad};-2\n"));
        }
        let (entries, layout) = parse_spectrum_series(
            text.as_bytes(),
            Path::new("soc.csv"),
            &ColumnMap::default(),
            "SOC",
        )
        .unwrap();
        assert_eq!(layout.factors[0], 1e3);
        assert_eq!(entries.len(), 2);
        assert_eq!(
            (entries[0].key.as_str(), entries[0].label),
            ("0,5", Some(0.5))
        );
        assert_eq!(entries[0].first_line, 3);
        let s = entries[0].spectrum.as_ref().unwrap();
        assert_eq!(s.len(), 6);
        assert_eq!(s.frequency_hz[0], 10.0);
        assert_eq!(s.z_re_ohm[5], 7.0);
        let e = entries[1].spectrum.as_ref().unwrap_err().to_string();
        assert!(e.starts_with("soc.csv:10:"), "{e}");
        // By number; a missing column; an empty name.
        let (by_number, _) = parse_spectrum_series(
            text.as_bytes(),
            Path::new("s.csv"),
            &ColumnMap::default(),
            "#1",
        )
        .unwrap();
        assert_eq!(by_number.len(), 2);
        let e = parse_spectrum_series(
            text.as_bytes(),
            Path::new("s.csv"),
            &ColumnMap::default(),
            "cycle",
        )
        .unwrap_err()
        .to_string();
        assert!(e.starts_with("s.csv:2: no column \"cycle\""), "{e}");
        let empty = "cycle,frequency_hz,z_re_ohm,z_im_ohm\n,1,2,3\n";
        let e = parse_spectrum_series(
            empty.as_bytes(),
            Path::new("e.csv"),
            &ColumnMap::default(),
            "cycle",
        )
        .unwrap_err()
        .to_string();
        assert!(
            e.starts_with("e.csv:2:") && e.contains("every row must name"),
            "{e}"
        );
    }
}
