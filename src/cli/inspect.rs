/*!
`zvet inspect PATH...`: print what the readers made of each object, so a user
can check a file before fitting it — id, source (file, HDU, row), pixels,
vacuum wavelength range, the medium the file used, median S/N, masked
fraction, flux unit and the readers' warnings. `--json` prints one JSON
object per line instead.

A multi-object frame (2-D image with one spectrum per row and a row table)
is explained first: where the flux, row table, wavelengths and noise were
found and how many sky and unused rows were skipped. Every file ends with
the time its reading took (in `--json` mode each object carries `read_ms`
instead).

A bad file (or a bad object in a multi-object file) gives one line on
stderr; the other files are still read, and the exit code is 1 when anything
failed (2 is kept for usage errors).
*/
use super::read_opts::ReadArgs;
use crate::io::{expand_inputs, frame_layout, stream_file_timed};
use crate::spectrum::{Medium, Spectrum};
use serde::Serialize;
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Duration;

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1e3
}

/// Arguments of `zvet inspect`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Spectrum files or folders (folders are searched for spectrum files).
    #[arg(required = true, value_name = "PATH")]
    pub paths: Vec<PathBuf>,
    /// One JSON object per line instead of the readable listing.
    #[arg(long)]
    pub json: bool,
    /// How to read the files.
    #[command(flatten)]
    pub read: ReadArgs,
}

/// What `inspect` reports about one object (also its JSON form).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Summary {
    /// Object id.
    pub id: String,
    /// File it came from.
    pub file: String,
    /// HDU index, for FITS.
    pub hdu: Option<usize>,
    /// Row of a multi-object table.
    pub row: Option<usize>,
    /// Number of pixels.
    pub pixels: usize,
    /// Shortest vacuum wavelength, Å.
    pub wave_min: f64,
    /// Longest vacuum wavelength, Å.
    pub wave_max: f64,
    /// Medium of the wavelengths in the file ("air" or "vacuum").
    pub medium: Medium,
    /// Median per-pixel S/N of the good pixels.
    pub median_snr: f64,
    /// Fraction of masked pixels.
    pub masked_fraction: f64,
    /// Flux unit as read.
    pub flux_unit: Option<String>,
    /// True when the uncertainty was estimated, not read.
    pub noise_estimated: bool,
    /// The readers' warnings.
    pub warnings: Vec<String>,
    /// Milliseconds spent reading this object (the first of a file includes
    /// opening the file).
    pub read_ms: f64,
}

impl Summary {
    /// Summarise one spectrum.
    pub fn of(s: &Spectrum) -> Summary {
        Summary {
            id: s.meta.id.clone(),
            file: s
                .meta
                .source
                .as_ref()
                .map(|p| p.display().to_string())
                .unwrap_or_default(),
            hdu: s.meta.hdu,
            row: s.meta.row,
            pixels: s.len(),
            wave_min: s.wave()[0],
            wave_max: s.wave()[s.len() - 1],
            medium: s.meta.medium_as_read,
            median_snr: s.median_snr(),
            masked_fraction: s.masked_fraction(),
            flux_unit: s.meta.flux_unit.clone(),
            noise_estimated: s.meta.noise_estimated,
            warnings: s.meta.warnings.clone(),
            read_ms: 0.0,
        }
    }

    fn text(&self) -> String {
        let mut src = self.file.clone();
        if let Some(h) = self.hdu {
            src.push_str(&format!(" HDU {h}"));
        }
        if let Some(r) = self.row {
            src.push_str(&format!(" row {r}"));
        }
        let medium = match self.medium {
            Medium::Air => "air (converted to vacuum)",
            Medium::Vacuum => "vacuum",
        };
        let mut out = format!(
            "{}\n  source      {}\n  pixels      {}\n  wavelength  {:.2}–{:.2} Å (vacuum)\n  medium      {}\n  median S/N  {:.2}{}\n  masked      {:.1} %\n  flux unit   {}\n",
            self.id,
            src,
            self.pixels,
            self.wave_min,
            self.wave_max,
            medium,
            self.median_snr,
            if self.noise_estimated { " (noise estimated)" } else { "" },
            100.0 * self.masked_fraction,
            self.flux_unit.as_deref().unwrap_or("(not given)"),
        );
        for w in &self.warnings {
            out.push_str(&format!("  warning     {w}\n"));
        }
        out
    }
}

/// Run `zvet inspect`.
pub fn run(args: Args) -> anyhow::Result<ExitCode> {
    let opts = args.read.to_options();
    let files = expand_inputs(&args.paths);
    let stdout = std::io::stdout();
    let mut out = stdout.lock();
    let mut failures = 0usize;
    let mut objects = 0usize;
    if files.is_empty() {
        eprintln!("zvet: no spectrum files found in the given paths");
        return Ok(ExitCode::from(1));
    }
    for path in &files {
        if !args.json {
            // Explain a multi-object frame before its objects (an error here
            // is reported by the read below).
            if let Ok(Some(layout)) = frame_layout(path, &opts) {
                writeln!(out, "{}\n{layout}", path.display())?;
            }
        }
        let mut stream = match stream_file_timed(path, &opts, |_| {}) {
            Ok(s) => s,
            Err(e) => {
                failures += 1;
                eprintln!("zvet: {e}");
                continue;
            }
        };
        let mut before = Duration::ZERO;
        while let Some(item) = stream.next() {
            let spent = stream.so_far().elapsed - before;
            before = stream.so_far().elapsed;
            match item {
                Ok(s) => {
                    objects += 1;
                    let mut sum = Summary::of(&s);
                    sum.read_ms = ms(spent);
                    if args.json {
                        writeln!(out, "{}", serde_json::to_string(&sum)?)?;
                    } else {
                        write!(out, "{}", sum.text())?;
                    }
                }
                Err(e) => {
                    failures += 1;
                    eprintln!("zvet: {e}");
                }
            }
        }
        let t = stream.so_far();
        let line = format!(
            "{}: {} object(s) read in {:.1} ms",
            path.display(),
            t.objects,
            ms(t.elapsed)
        );
        if !args.json {
            writeln!(out, "{line}")?;
        }
    }
    out.flush()?;
    if !args.json {
        eprintln!(
            "zvet: {objects} object(s) read from {} file(s); {failures} problem(s)",
            files.len()
        );
    }
    Ok(if failures > 0 {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    })
}
