/*!
Reading the inputs: every object of every file, streamed file by file (a
multi-object table row by row, see [`crate::io::stream_file`]) so that memory
stays bounded; a file or object that cannot be read becomes a
[`ReadFailure`] and the run goes on.
*/
use crate::io::ReadOptions;
use crate::spectrum::Spectrum;
use std::path::PathBuf;

/// One object as read: a spectrum, or why it could not be read.
pub type Item = Result<Spectrum, ReadFailure>;

/// An object (or file) that could not be read.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ReadFailure {
    /// Id to report (the file stem when nothing better is known).
    pub object_id: String,
    /// The file.
    pub source: String,
    /// The reader's message.
    pub message: String,
}

/// `file[hdu=2,row=5]`-style source of a spectrum.
pub fn source_of(s: &Spectrum) -> String {
    let mut out = s
        .meta
        .source
        .as_ref()
        .map(|p| p.display().to_string())
        .unwrap_or_default();
    let mut parts = Vec::new();
    if let Some(h) = s.meta.hdu {
        parts.push(format!("hdu={h}"));
    }
    if let Some(r) = s.meta.row {
        parts.push(format!("row={r}"));
    }
    if !parts.is_empty() {
        out.push_str(&format!("[{}]", parts.join(",")));
    }
    out
}

/// Every object of `files`, streamed file by file; a file that cannot be
/// opened becomes one failed item (id = file stem) and the stream goes on.
pub fn stream(files: Vec<PathBuf>, opts: ReadOptions) -> impl Iterator<Item = Item> + Send {
    stream_timed(files, opts, None)
}

/// [`stream`], sending each file's reading time (see
/// [`crate::io::stream_file_timed`]) to `times` when its objects have all
/// been taken.
pub fn stream_timed(
    files: Vec<PathBuf>,
    opts: ReadOptions,
    times: Option<std::sync::mpsc::Sender<crate::io::FileReadTime>>,
) -> impl Iterator<Item = Item> + Send {
    files.into_iter().flat_map(move |path| {
        let tx = times.clone();
        let done = move |t: crate::io::FileReadTime| {
            if let Some(tx) = tx {
                // the receiver may be gone (a cancelled run): nothing to report then
                let _ = tx.send(t);
            }
        };
        let source = path.display().to_string();
        let stem = path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| source.clone());
        let stem = stem.split('.').next().unwrap_or(&stem).to_string();
        let items: Box<dyn Iterator<Item = Item> + Send> =
            match crate::io::stream_file_timed(&path, &opts, done) {
                Ok(it) => {
                    let (source, stem) = (source.clone(), stem.clone());
                    Box::new(it.map(move |r| {
                        r.map_err(|e| ReadFailure {
                            object_id: stem.clone(),
                            source: source.clone(),
                            message: e.to_string(),
                        })
                    }))
                }
                Err(e) => Box::new(std::iter::once(Err(ReadFailure {
                    object_id: stem,
                    source,
                    message: e.to_string(),
                }))),
            };
        items
    })
}

/// Every spectrum of `files` in memory, with the first of each id kept; what
/// could not be read and repeated ids come back as problems.
pub fn read_all(files: Vec<PathBuf>, opts: &ReadOptions) -> (Vec<Spectrum>, Vec<String>) {
    let mut spectra = Vec::new();
    let mut problems = Vec::new();
    let mut seen = std::collections::HashSet::new();
    for item in stream(files, opts.clone()) {
        match item {
            Ok(s) => {
                if seen.insert(s.meta.id.clone()) {
                    spectra.push(s);
                } else {
                    problems.push(format!(
                        "object id '{}' appears more than once ({}); the first spectrum is used",
                        s.meta.id,
                        source_of(&s)
                    ));
                }
            }
            // the reader's message already names the file
            Err(f) => problems.push(f.message),
        }
    }
    (spectra, problems)
}
