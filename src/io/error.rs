/*!
The typed error of the spectrum readers.

Every variant says *where* in the file the problem is (HDU, row, column) and
*what* is wrong; [`LoadError::WithPath`] adds the file. `Display` gives one
line, so `zvet inspect` can print one clear line per bad file.
*/
use crate::spectrum::SpectrumError;
use std::fmt;
use std::path::PathBuf;

/// A place inside a file: HDU (index and name), table row, column.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Loc {
    /// HDU index, 0 = primary (u32 keeps errors small).
    pub hdu: Option<u32>,
    /// EXTNAME of that HDU, if any (boxed to keep errors small).
    pub hdu_name: Option<Box<str>>,
    /// Row of a table (0-based).
    pub row: Option<u64>,
    /// Line of a text file (1-based).
    pub line: Option<u32>,
}

impl Loc {
    /// A location in HDU `hdu`.
    pub fn hdu(hdu: usize, name: Option<String>) -> Loc {
        Loc {
            hdu: Some(small(hdu)),
            hdu_name: name.map(String::into_boxed_str),
            ..Default::default()
        }
    }

    /// The same location, in table row `row`.
    pub fn with_row(&self, row: usize) -> Loc {
        Loc {
            row: Some(row as u64),
            ..self.clone()
        }
    }

    /// A location in a text file.
    pub fn line(line: usize) -> Loc {
        Loc {
            line: Some(small(line)),
            ..Default::default()
        }
    }

    fn is_empty(&self) -> bool {
        self.hdu.is_none() && self.row.is_none() && self.line.is_none()
    }
}

impl fmt::Display for Loc {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let mut parts = Vec::new();
        if let Some(h) = self.hdu {
            match &self.hdu_name {
                Some(n) if !n.is_empty() => parts.push(format!("HDU {h} ({n})")),
                _ => parts.push(format!("HDU {h}")),
            }
        }
        if let Some(r) = self.row {
            parts.push(format!("row {r}"));
        }
        if let Some(l) = self.line {
            parts.push(format!("line {l}"));
        }
        f.write_str(&parts.join(", "))
    }
}

/// An index that fits a u32 (saturating; no FITS file has 4 billion HDUs or text lines of interest).
fn small(x: usize) -> u32 {
    u32::try_from(x).unwrap_or(u32::MAX)
}

/// Prefix "`loc`: " when the location is known.
struct At<'a>(&'a Loc);

impl fmt::Display for At<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.0.is_empty() {
            Ok(())
        } else {
            write!(f, "{}: ", self.0)
        }
    }
}

/// Why a spectrum file could not be read.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum LoadError {
    /// The file could not be opened or read at all.
    #[error("cannot read file: {0}")]
    Io(#[from] std::io::Error),
    /// A file name the FITS library cannot take.
    #[error("unusable file name: {0}")]
    BadFileName(String),
    /// Neither FITS nor a text table.
    #[error("not a FITS file or a text table ({0})")]
    UnknownFormat(String),
    /// The FITS file ends before its headers say it should.
    #[error("truncated FITS file: {0}")]
    Truncated(String),
    /// The FITS library reported an error.
    #[error("{}FITS error: {message}", At(at))]
    Fits {
        /// where
        at: Loc,
        /// the library's message
        message: String,
    },
    /// No HDU of the file holds a spectrum this reader understands.
    #[error("no spectrum found: {0}")]
    NoSpectrum(String),
    /// The requested HDU does not exist or is not a spectrum.
    #[error("{}{reason}", At(at))]
    BadHdu {
        /// where
        at: Loc,
        /// why it cannot be used
        reason: String,
    },
    /// A required column is missing.
    #[error("{}no {role} column (tried: {tried}; choose one with --{flag})", At(at))]
    MissingColumn {
        /// where
        at: Loc,
        /// "wavelength", "flux", …
        role: &'static str,
        /// names tried, comma separated
        tried: String,
        /// the command-line option that names the column
        flag: &'static str,
    },
    /// A column exists but holds the wrong kind of data.
    #[error("{}column '{column}' ({role}) holds {found}, expected numbers", At(at))]
    ColumnType {
        /// where
        at: Loc,
        /// column name as in the file
        column: String,
        /// its role
        role: &'static str,
        /// the FITS/CSV type found
        found: String,
    },
    /// Arrays that belong together have different lengths.
    #[error("{}lengths differ: {detail}", At(at))]
    LengthMismatch {
        /// where
        at: Loc,
        /// which arrays, which lengths
        detail: String,
    },
    /// Every flux value is missing or not finite (or every pixel is masked).
    #[error(
        "{}no usable pixel: every flux (or its uncertainty) is NaN, infinite, zero-weight or masked",
        At(at)
    )]
    NoGoodPixels {
        /// where
        at: Loc,
    },
    /// A wavelength unit this reader does not know.
    #[error(
        "{}unknown wavelength unit '{unit}' in {keyword} (known: Angstrom, nm, um, m)",
        At(at)
    )]
    UnknownUnit {
        /// where
        at: Loc,
        /// keyword that held it (CUNIT1, TUNITn, header)
        keyword: String,
        /// the unit string
        unit: String,
    },
    /// The spectral WCS of an image is missing or unusable.
    #[error("{}bad spectral WCS: {reason}", At(at))]
    BadWcs {
        /// where
        at: Loc,
        /// what is wrong
        reason: String,
    },
    /// A table without rows.
    #[error("{}empty table (0 rows)", At(at))]
    EmptyTable {
        /// where
        at: Loc,
    },
    /// Text that cannot be parsed.
    #[error("{}{message}", At(at))]
    Text {
        /// where
        at: Loc,
        /// what is wrong
        message: String,
    },
    /// The data break a spectrum invariant (non-monotonic wavelengths, …).
    #[error("{}{source}", At(at))]
    Invalid {
        /// where
        at: Loc,
        /// the violated invariant
        source: SpectrumError,
    },
    /// The file declares more than zvet reads (bounds in the README, "what
    /// zvet does with bad input").
    #[error("too large: {0}")]
    TooLarge(String),
    /// A FITS construct zvet does not read (variable-length or complex columns).
    #[error("{}unsupported: {detail}", At(at))]
    Unsupported {
        /// where
        at: Loc,
        /// what is not supported
        detail: String,
    },
    /// The FITS library panicked on this file (caught; the file is malformed).
    #[error("malformed FITS file (the FITS library gave up: {0})")]
    Malformed(String),
    /// Any of the above, for one file.
    #[error("{}: {source}", path.display())]
    WithPath {
        /// the file
        path: PathBuf,
        /// what went wrong
        source: Box<LoadError>,
    },
}

impl LoadError {
    /// Attach the file path (once; an error that has a path keeps it).
    pub fn with_path(self, path: impl Into<PathBuf>) -> LoadError {
        match self {
            e @ LoadError::WithPath { .. } => e,
            e => LoadError::WithPath {
                path: path.into(),
                source: Box::new(e),
            },
        }
    }

    /// The error without its path wrapper (for matching on the variant).
    pub fn kind(&self) -> &LoadError {
        match self {
            LoadError::WithPath { source, .. } => source.kind(),
            e => e,
        }
    }

    /// Map a violated spectrum invariant to the reader's error at `at`.
    pub fn from_spectrum(e: SpectrumError, at: Loc) -> LoadError {
        match e {
            SpectrumError::NoGoodPixels => LoadError::NoGoodPixels { at },
            SpectrumError::LengthMismatch { .. } => LoadError::LengthMismatch {
                at,
                detail: e.to_string(),
            },
            other => LoadError::Invalid { at, source: other },
        }
    }

    /// A truncation found at `at`.
    pub(crate) fn truncated_at(at: &Loc, message: &str) -> LoadError {
        LoadError::Truncated(format!("{}{message}", At(at)))
    }

    /// Wrap a FITS library error at `at`; end-of-file errors mean truncation.
    pub fn fits(e: fitsio::errors::Error, at: Loc) -> LoadError {
        let message = match &e {
            fitsio::errors::Error::Fits(fe) => {
                // cfitsio status 107 = END_OF_FILE ("tried to move past end
                // of file"), 108 = READ_ERROR (cfitsio's fitsio.h).
                if fe.status == 107 || fe.status == 108 {
                    return LoadError::Truncated(format!("{}{}", At(&at), fe.message));
                }
                format!("{} (status {})", fe.message, fe.status)
            }
            other => format!("{other}"),
        };
        LoadError::Fits { at, message }
    }
}
