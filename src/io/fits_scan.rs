/*!
A check of a FITS file's layout before the FITS library reads it: every HDU's
header is parsed here (BITPIX, NAXIS, NAXISn, PCOUNT, GCOUNT, TFIELDS,
TFORMn) and every size it declares is checked against the bytes the file
really holds, so that no allocation is ever sized by a number the file merely
claims.

The data unit of HDU *k* holds |BITPIX|·GCOUNT·(PCOUNT + NAXIS1·…·NAXISn)/8
bytes (FITS standard 4.0, §4.4.1.1, eq. 2; for the primary HDU and images
PCOUNT = 0, GCOUNT = 1), padded to whole 2880-byte blocks (§3.1). A data unit
that runs past the end of the file is a truncated file; one that runs over
the header of a following extension (a block starting `XTENSION=` then
`BITPIX  =`, the mandatory order of §7.1.1) declares a wrong size (a changed
NAXISn or BITPIX) and would read the next HDU's bytes as data: both are
errors.

Binary-table columns are checked too (§7.3): the widths of the TFORMn
columns must add up to NAXIS1; variable-length arrays (`P`, `Q`) and complex
numbers (`C`, `M`) are flagged so that the readers can refuse them with a
plain message.

Memory: the scan reads the file block by block (one 2880-byte block at a
time). A gzip-compressed file is inflated as a stream while it is scanned and
refused when it inflates to more than [`MAX_INFLATED`] bytes, since the FITS
library then holds the whole inflated file in memory.

Speed: a plain (not compressed) file is not read through its large data
units: the scan moves to the end the header declares and looks at what lies
there. When that is the end of the file or the header of an extension, the
sizes are consistent and the data unit is passed over unread (a 72 MB
multi-object table is then checked in microseconds, not by reading 72 MB);
anything else there sends the scan back through the data unit block by block,
which finds the header it runs over or the bytes that follow the last HDU,
as for a stream. What this cannot see is a size card wrong by exactly the
size of whole HDUs that follow (ending again on a header or the end of the
file): the file then reads as fewer HDUs with the last one longer, all of it
bytes the file holds.
*/
use super::{LoadError, Loc};
use std::io::Read;
use std::path::Path;

/// FITS block size (FITS standard 4.0, §3.1).
pub const BLOCK: u64 = 2880;

/// Largest inflated size of a `.gz` FITS file zvet reads (the FITS library
/// inflates the whole file into memory): 256 MiB.
pub const MAX_INFLATED: u64 = 1 << 28;

/// Most pixels one spectrum may have (an image axis, a vector column's
/// repeat, the rows of a one-pixel-per-row table): 4 194 304. At 8 bytes
/// per value and up to five arrays per spectrum this bounds the memory of
/// one spectrum being read to about 170 MB.
pub const MAX_PIXELS: u64 = 1 << 22;

/// Most header blocks of one HDU (36 cards each): 10 000, far more than any
/// spectrum file needs.
const MAX_HEADER_BLOCKS: u64 = 10_000;

/// What kind of column a TFORMn declares, as far as the readers care.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ColumnForm {
    /// Fixed-width numbers, text, logicals or bits: `repeat` elements.
    Fixed {
        /// element count
        repeat: u64,
    },
    /// A variable-length array descriptor (`P` or `Q`).
    VariableLength,
    /// Complex numbers (`C` or `M`).
    Complex,
}

/// One HDU as its header declares it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct HduLayout {
    /// Index (0 = primary).
    pub index: usize,
    /// Byte offset of the header.
    pub header_start: u64,
    /// Byte offset of the data unit.
    pub data_start: u64,
    /// Declared size of the data unit in bytes (without padding).
    pub data_len: u64,
    /// `XTENSION` value (`None` for the primary HDU).
    pub xtension: Option<String>,
    /// EXTNAME, if any.
    pub extname: Option<String>,
    /// BITPIX.
    pub bitpix: i64,
    /// NAXIS1, NAXIS2, … in file order.
    pub naxis: Vec<u64>,
    /// Binary/ASCII table columns (TTYPEn, form), empty for images.
    pub columns: Vec<(String, ColumnForm)>,
}

impl HduLayout {
    /// Offset of the first byte after this HDU's padded data unit.
    pub fn end(&self) -> u64 {
        self.data_start.saturating_add(padded(self.data_len))
    }

    /// Where the readers' errors point.
    pub fn loc(&self) -> Loc {
        Loc::hdu(self.index, self.extname.clone())
    }
}

/// `n` rounded up to whole blocks (saturating: a size near 2⁶⁴ is refused
/// later as running past the end of the file).
fn padded(n: u64) -> u64 {
    n.div_ceil(BLOCK).saturating_mul(BLOCK)
}

/// Read the layout of the FITS file at `path` (inflating `.gz` as a stream)
/// and check it; see the module documentation for what is checked.
pub fn fits_layout(path: &Path) -> Result<Vec<HduLayout>, LoadError> {
    let mut f = std::fs::File::open(path)?;
    // gzip by its magic bytes (1F 8B, RFC 1952 §2.3.1), whatever the name.
    let mut magic = [0u8; 2];
    let gz = f.read_exact(&mut magic).is_ok() && magic == [0x1f, 0x8b];
    std::io::Seek::seek(&mut f, std::io::SeekFrom::Start(0))?;
    if gz {
        let rd = flate2::read::MultiGzDecoder::new(std::io::BufReader::new(f));
        scan(Streamed(rd.take(MAX_INFLATED + 1)), true, false)
    } else {
        scan(
            Seekable(std::io::BufReader::with_capacity(1 << 16, f)),
            false,
            false,
        )
    }
}

/// Data units at least this long (bytes, padded) are passed over unread in
/// a seekable file when the sizes are consistent (see the module
/// documentation): 64 KiB, below which reading costs no more than looking.
const PASS_OVER_MIN: u64 = 1 << 16;

/// Where the scan reads FITS bytes from.
trait Source: Read {
    /// Move from `pos` to `pos + len` without reading what lies between, if
    /// the block at `pos + len` is the header of an extension or the end of
    /// the file; otherwise stay at `pos` and answer false.
    fn pass_over(&mut self, pos: u64, len: u64) -> std::io::Result<bool>;
}

/// A stream (inflated on the fly, or bytes in memory): read through.
struct Streamed<R>(R);

impl<R: Read> Read for Streamed<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        self.0.read(buf)
    }
}

impl<R: Read> Source for Streamed<R> {
    fn pass_over(&mut self, _pos: u64, _len: u64) -> std::io::Result<bool> {
        Ok(false)
    }
}

/// A plain file: large data units are passed over when consistent.
struct Seekable<R>(R);

impl<R: Read> Read for Seekable<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        self.0.read(buf)
    }
}

impl<R: Read + std::io::Seek> Source for Seekable<R> {
    fn pass_over(&mut self, pos: u64, len: u64) -> std::io::Result<bool> {
        use std::io::SeekFrom;
        if len < PASS_OVER_MIN {
            return Ok(false);
        }
        let Some(end) = pos.checked_add(len) else {
            return Ok(false);
        };
        let file_len = self.0.seek(SeekFrom::End(0))?;
        let ok = if end == file_len {
            true
        } else if end < file_len {
            self.0.seek(SeekFrom::Start(end))?;
            let mut head = [0u8; 90];
            fill(&mut self.0, &mut head).is_ok_and(|n| is_header_start(&head[..n]))
        } else {
            false
        };
        self.0.seek(SeekFrom::Start(if ok { end } else { pos }))?;
        Ok(ok)
    }
}

/// The layout of a FITS file held in memory (for tests and the fuzz runner).
pub fn layout_of_bytes(bytes: &[u8]) -> Result<Vec<HduLayout>, LoadError> {
    scan(Streamed(bytes), false, false)
}

/// [`fits_layout`] for a file zvet has just written: additionally, every
/// data unit must be padded to whole blocks and nothing may follow the last
/// HDU, so the file's length is exactly what its headers declare.
pub fn fits_layout_exact(path: &Path) -> Result<Vec<HduLayout>, LoadError> {
    let f = std::fs::File::open(path)?;
    scan(
        Streamed(std::io::BufReader::with_capacity(1 << 16, f)),
        false,
        true,
    )
}

/// Fill `buf` as far as the stream allows; returns the bytes read.
fn fill(rd: &mut impl Read, buf: &mut [u8]) -> Result<usize, LoadError> {
    let mut n = 0;
    while n < buf.len() {
        match rd.read(&mut buf[n..]) {
            Ok(0) => break,
            Ok(k) => n += k,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => {
                return Err(match e.kind() {
                    std::io::ErrorKind::InvalidInput | std::io::ErrorKind::InvalidData => {
                        LoadError::Truncated(format!("the compressed stream is damaged: {e}"))
                    }
                    _ => LoadError::Io(e),
                })
            }
        }
    }
    Ok(n)
}

/// One header card's keyword and value text (before any comment).
fn card(c: &[u8]) -> (String, Option<String>) {
    let key = String::from_utf8_lossy(&c[..8]).trim_end().to_string();
    if &c[8..10] != b"= " {
        return (key, None);
    }
    let v = String::from_utf8_lossy(&c[10..]);
    let v = v.trim_start();
    if let Some(rest) = v.strip_prefix('\'') {
        // A string: '' is a quote inside it.
        let mut out = String::new();
        let mut chars = rest.chars().peekable();
        while let Some(ch) = chars.next() {
            if ch == '\'' {
                if chars.peek() == Some(&'\'') {
                    chars.next();
                    out.push('\'');
                } else {
                    break;
                }
            } else {
                out.push(ch);
            }
        }
        return (key, Some(out.trim_end().to_string()));
    }
    let v = v.split('/').next().unwrap_or("").trim().to_string();
    (key, Some(v))
}

fn is_header_start(block: &[u8]) -> bool {
    block.len() >= 90 && block.starts_with(b"XTENSION= ") && block[80..].starts_with(b"BITPIX  =")
}

/// Parse a TFORMn of a binary table: (bytes per row, form).
fn bin_form(t: &str) -> Option<(u64, ColumnForm)> {
    let t = t.trim();
    let digits: String = t.chars().take_while(|c| c.is_ascii_digit()).collect();
    let repeat: u64 = if digits.is_empty() {
        1
    } else {
        digits.parse().ok()?
    };
    let code = t[digits.len()..].chars().next()?.to_ascii_uppercase();
    let width = match code {
        'L' | 'B' | 'A' => 1,
        'X' => return Some((repeat.div_ceil(8), ColumnForm::Fixed { repeat })),
        'I' => 2,
        'J' | 'E' => 4,
        'K' | 'D' => 8,
        'C' => return Some((repeat.checked_mul(8)?, ColumnForm::Complex)),
        'M' => return Some((repeat.checked_mul(16)?, ColumnForm::Complex)),
        'P' => return Some((repeat.min(1) * 8, ColumnForm::VariableLength)),
        'Q' => return Some((repeat.min(1) * 16, ColumnForm::VariableLength)),
        _ => return None,
    };
    Some((repeat.checked_mul(width)?, ColumnForm::Fixed { repeat }))
}

fn scan(mut rd: impl Source, gz: bool, exact: bool) -> Result<Vec<HduLayout>, LoadError> {
    let mut hdus: Vec<HduLayout> = Vec::new();
    let mut pos: u64 = 0;
    let mut block = vec![0u8; BLOCK as usize];
    let too_big = |pos: u64| -> Option<LoadError> {
        (gz && pos > MAX_INFLATED).then(|| {
            LoadError::TooLarge(format!(
                "the compressed file inflates to more than {} MiB (the limit for .gz files, which are inflated in memory); gunzip it and read the plain file",
                MAX_INFLATED >> 20
            ))
        })
    };
    loop {
        let index = hdus.len();
        let at = Loc::hdu(index, None);
        let header_start = pos;
        let n = fill(&mut rd, &mut block)?;
        if let Some(e) = too_big(pos + n as u64) {
            return Err(e);
        }
        if n == 0 {
            if index == 0 {
                return Err(LoadError::Truncated("the file is empty".into()));
            }
            return Ok(hdus);
        }
        let first = &block[..n];
        if index == 0 {
            if !first.starts_with(b"SIMPLE  =") {
                return Err(LoadError::UnknownFormat(
                    "a FITS file starts with the card SIMPLE  = T".into(),
                ));
            }
        } else if !first.starts_with(b"XTENSION=") {
            // Bytes after the last HDU that are not an extension (FITS 4.0
            // §3.5 allows such special records): the HDU list ends here.
            if exact {
                return Err(LoadError::Malformed(format!(
                    "bytes after the last HDU, at byte {pos}, that are not an extension"
                )));
            }
            return Ok(hdus);
        }
        // Header: cards until END.
        let mut kv: Vec<(String, String)> = Vec::new();
        let mut blocks = 0u64;
        let mut ended = false;
        let mut cur_len = n;
        loop {
            if cur_len < BLOCK as usize {
                return Err(LoadError::Truncated(format!(
                    "{at}: the file ends inside the header (byte {})",
                    pos + cur_len as u64
                )));
            }
            blocks += 1;
            pos += BLOCK;
            for c in block.chunks(80) {
                let (k, v) = card(c);
                if k == "END" {
                    ended = true;
                    break;
                }
                if let Some(v) = v {
                    kv.push((k, v));
                }
            }
            if ended {
                break;
            }
            if blocks >= MAX_HEADER_BLOCKS {
                return Err(LoadError::Malformed(format!(
                    "{at}: no END card in the first {MAX_HEADER_BLOCKS} header blocks"
                )));
            }
            cur_len = fill(&mut rd, &mut block)?;
            if let Some(e) = too_big(pos + cur_len as u64) {
                return Err(e);
            }
        }
        let get = |k: &str| kv.iter().find(|(key, _)| key == k).map(|(_, v)| v.as_str());
        let extname = get("EXTNAME").map(str::to_string).filter(|s| !s.is_empty());
        let at = Loc::hdu(index, extname.clone());
        let bad = |what: String| LoadError::BadHdu {
            at: at.clone(),
            reason: what,
        };
        let int = |k: &str, min: i64| -> Result<Option<i64>, LoadError> {
            match get(k) {
                None => Ok(None),
                Some(v) => match v.parse::<i64>() {
                    Ok(x) if x >= min => Ok(Some(x)),
                    _ => Err(bad(format!("{k} = {v} is not a whole number ≥ {min}"))),
                },
            }
        };
        let bitpix = int("BITPIX", i64::MIN)?.ok_or_else(|| bad("no BITPIX card".into()))?;
        if ![8, 16, 32, 64, -32, -64].contains(&bitpix) {
            return Err(bad(format!(
                "BITPIX = {bitpix} is not one of 8, 16, 32, 64, −32, −64 (FITS standard 4.0, Table 8)"
            )));
        }
        let naxis = int("NAXIS", 0)?.ok_or_else(|| bad("no NAXIS card".into()))?;
        if naxis > 999 {
            return Err(bad(format!("NAXIS = {naxis} is more than 999")));
        }
        let mut axes = Vec::with_capacity(naxis as usize);
        for i in 1..=naxis {
            let k = format!("NAXIS{i}");
            axes.push(int(&k, 0)?.ok_or_else(|| bad(format!("no {k} card")))? as u64);
        }
        let xtension = (index > 0).then(|| get("XTENSION").unwrap_or("").trim().to_string());
        let pcount = if index > 0 {
            int("PCOUNT", 0)?.unwrap_or(0) as u64
        } else {
            0
        };
        let gcount = if index > 0 {
            int("GCOUNT", 1)?.unwrap_or(1) as u64
        } else {
            1
        };
        // Random groups (primary, NAXIS1 = 0, GROUPS = T): NAXIS1 is not a size.
        let groups = index == 0 && axes.first() == Some(&0) && get("GROUPS") == Some("T");
        let size_axes = if groups { &axes[1..] } else { &axes[..] };
        let overflow = || bad("the declared data size overflows 64 bits".into());
        let elements: u64 = if size_axes.is_empty() && !groups {
            0
        } else {
            size_axes
                .iter()
                .try_fold(1u64, |a, &b| a.checked_mul(b))
                .ok_or_else(overflow)?
        };
        let data_len = if naxis == 0 {
            0
        } else {
            (bitpix.unsigned_abs() / 8)
                .checked_mul(gcount)
                .and_then(|g| g.checked_mul(pcount.checked_add(elements)?))
                .ok_or_else(overflow)?
        };
        // Table columns.
        let mut columns = Vec::new();
        let kind = xtension.as_deref().unwrap_or("");
        if kind == "BINTABLE" || kind == "TABLE" {
            let tfields = int("TFIELDS", 0)?.unwrap_or(0);
            if tfields > 999 {
                return Err(bad(format!("TFIELDS = {tfields} is more than 999")));
            }
            let mut width = 0u64;
            for i in 1..=tfields {
                let form = get(&format!("TFORM{i}"))
                    .ok_or_else(|| bad(format!("no TFORM{i} card")))?
                    .to_string();
                let name = get(&format!("TTYPE{i}")).unwrap_or("").to_string();
                if kind == "BINTABLE" {
                    let (w, f) = bin_form(&form).ok_or_else(|| {
                        bad(format!("TFORM{i} = '{form}' is not a binary-table column format"))
                    })?;
                    width = width.checked_add(w).ok_or_else(overflow)?;
                    columns.push((name, f));
                } else {
                    columns.push((name, ColumnForm::Fixed { repeat: 1 }));
                }
            }
            if kind == "BINTABLE" && width != axes.first().copied().unwrap_or(0) {
                return Err(bad(format!(
                    "the columns (TFORMn) take {width} bytes per row but NAXIS1 = {}",
                    axes.first().copied().unwrap_or(0)
                )));
            }
        }
        let layout = HduLayout {
            index,
            header_start,
            data_start: pos,
            data_len,
            xtension,
            extname,
            bitpix,
            naxis: axes,
            columns,
        };
        // Data: present in full, and not running over a following header.
        let mut left = padded(data_len);
        if rd.pass_over(pos, left)? {
            pos += left;
            left = 0;
        }
        while left > 0 {
            let n = fill(&mut rd, &mut block)?;
            if let Some(e) = too_big(pos + n as u64) {
                return Err(e);
            }
            if is_header_start(&block[..n]) {
                return Err(LoadError::BadHdu {
                    at: layout.loc(),
                    reason: format!(
                        "the data unit declared by the header ({data_len} bytes from BITPIX, NAXISn, PCOUNT, GCOUNT) runs over the header of the next extension at byte {pos}: a size card is wrong"
                    ),
                });
            }
            let need = left.min(BLOCK);
            if (n as u64) < need {
                let have = pos + n as u64 - layout.data_start;
                // Missing padding after the last data byte is tolerated
                // (except in a file zvet has just written).
                if have >= data_len && exact {
                    return Err(LoadError::Truncated(format!(
                        "{}: the last data unit is not padded to a whole {BLOCK}-byte block",
                        layout.loc()
                    )));
                }
                if have < data_len {
                    return Err(LoadError::Truncated(format!(
                        "{}: the header declares {data_len} bytes of data (BITPIX, NAXISn, PCOUNT, GCOUNT) but the file ends after {have}",
                        layout.loc()
                    )));
                }
                hdus.push(layout);
                return Ok(hdus);
            }
            pos += need;
            left -= need;
        }
        hdus.push(layout);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn header(cards: &[&str]) -> Vec<u8> {
        let mut h = String::new();
        for c in cards {
            h.push_str(&format!("{c:<80}"));
        }
        h.push_str(&format!("{:<80}", "END"));
        let mut b = h.into_bytes();
        b.resize(padded(b.len() as u64) as usize, b' ');
        b
    }

    fn image(naxis1: u64, data: usize) -> Vec<u8> {
        let mut b = header(&[
            "SIMPLE  =                    T",
            "BITPIX  =                  -32",
            "NAXIS   =                    1",
            &format!("NAXIS1  = {naxis1:>20}"),
        ]);
        let mut d = vec![0u8; data];
        d.resize(padded(data as u64) as usize, 0);
        b.extend(d);
        b
    }

    fn ext() -> Vec<u8> {
        let mut b = header(&[
            "XTENSION= 'IMAGE   '",
            "BITPIX  =                  -32",
            "NAXIS   =                    1",
            "NAXIS1  =                  100",
            "PCOUNT  =                    0",
            "GCOUNT  =                    1",
        ]);
        b.extend(vec![0u8; 2880]);
        b
    }

    #[test]
    fn sizes_follow_the_standard_formula() {
        // FITS standard 4.0, §4.4.1.1: |BITPIX|/8 · NAXIS1 bytes.
        let mut f = image(1000, 4000);
        f.extend(ext());
        let l = layout_of_bytes(&f).unwrap();
        assert_eq!(l.len(), 2);
        assert_eq!(l[0].data_len, 4000);
        assert_eq!(l[0].data_start, 2880);
        assert_eq!(l[1].header_start, 2880 * 3);
        assert_eq!(l[1].end(), f.len() as u64);
    }

    #[test]
    fn a_size_past_the_end_is_truncation() {
        let f = image(20_000_000_000, 4000);
        let e = layout_of_bytes(&f).unwrap_err();
        assert!(matches!(e, LoadError::Truncated(_)), "{e}");
    }

    #[test]
    fn a_size_over_the_next_header_is_refused() {
        // NAXIS1 doubled: the data unit would swallow the next extension.
        let mut f = image(2000, 4000);
        f.truncate(2880 * 3);
        f.extend(ext());
        f.extend(vec![0u8; 2880 * 2]);
        let e = layout_of_bytes(&f).unwrap_err();
        assert!(e.to_string().contains("runs over the header"), "{e}");
    }

    /// The layout as a plain file is scanned (large data units passed over
    /// when consistent), from bytes in memory.
    fn layout_seekable(bytes: &[u8]) -> Result<Vec<HduLayout>, LoadError> {
        scan(Seekable(std::io::Cursor::new(bytes)), false, false)
    }

    #[test]
    fn passing_over_large_data_units_finds_what_reading_them_finds() {
        // 100 000 float32 (400 000 bytes, above PASS_OVER_MIN) then an extension
        let n = 100_000u64;
        let mut good = image(n, 4 * n as usize);
        good.extend(ext());
        assert_eq!(layout_seekable(&good).unwrap(), layout_of_bytes(&good).unwrap());
        // the same ending at the end of the file
        let last = image(n, 4 * n as usize);
        assert_eq!(layout_seekable(&last).unwrap(), layout_of_bytes(&last).unwrap());
        // special records after the last HDU (not an extension): the list ends there
        let mut special = last.clone();
        special.extend(vec![b'x'; 2880]);
        assert_eq!(layout_seekable(&special).unwrap().len(), 1);
        // NAXIS1 doubled over a following extension and more bytes: the
        // header it runs over is found by reading, as in a stream
        let mut over = image(2 * n, 4 * n as usize);
        over.truncate(padded(2880 + 4 * n) as usize);
        over.extend(ext());
        over.extend(vec![0u8; 4 * n as usize]);
        for e in [
            layout_seekable(&over).unwrap_err(),
            layout_of_bytes(&over).unwrap_err(),
        ] {
            assert!(e.to_string().contains("runs over the header"), "{e}");
        }
        // NAXIS1 past the end of the file: truncation either way
        let mut short = image(n, 4 * n as usize);
        short.truncate(2880 + 4 * n as usize / 2);
        for e in [
            layout_seekable(&short).unwrap_err(),
            layout_of_bytes(&short).unwrap_err(),
        ] {
            assert!(matches!(e, LoadError::Truncated(_)), "{e}");
        }
    }

    fn table(tform2: &str) -> Vec<u8> {
        let mut f = header(&[
            "SIMPLE  =                    T",
            "BITPIX  =                    8",
            "NAXIS   =                    0",
        ]);
        f.extend(header(&[
            "XTENSION= 'BINTABLE'",
            "BITPIX  =                    8",
            "NAXIS   =                    2",
            "NAXIS1  =                   16",
            "NAXIS2  =                    1",
            "PCOUNT  =                    0",
            "GCOUNT  =                    1",
            "TFIELDS =                    2",
            "TTYPE1  = 'FLUX    '",
            "TFORM1  = '1PD(3)  '",
            "TTYPE2  = 'Z       '",
            &format!("TFORM2  = '{tform2}'"),
        ]));
        f.extend(vec![0u8; 2880]);
        f
    }

    #[test]
    fn column_widths_must_add_up_and_odd_forms_are_flagged() {
        // Widths from FITS standard 4.0, Table 18: P = 8 bytes, C = 8 bytes.
        let l = layout_of_bytes(&table("1C")).unwrap();
        assert_eq!(l[1].columns[0].1, ColumnForm::VariableLength);
        assert_eq!(l[1].columns[1].1, ColumnForm::Complex);
        // A repeat of 10^10 no longer matches NAXIS1.
        let e = layout_of_bytes(&table("10000000000E")).unwrap_err();
        assert!(e.to_string().contains("bytes per row"), "{e}");
    }
}
