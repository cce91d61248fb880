//! HEALPix maps in FITS files, by the open HEALPix FITS convention ("FITS file format
//! specifications for HEALPix products", Hivon et al., HEALPix documentation).
//!
//! A map is a binary table (normally HDU 1) with the keywords `PIXTYPE = 'HEALPIX'`, `ORDERING`
//! (`RING` / `NESTED`), `NSIDE`, and either
//! * full sky, `INDXSCHM = 'IMPLICIT'` / `OBJECT = 'FULLSKY'`: each column holds the 12·NSIDE²
//!   pixel values in order, usually as rows of 1024 values (`TFORM = '1024E'`), or one per row;
//! * partial sky, `INDXSCHM = 'EXPLICIT'` / `OBJECT = 'PARTIAL'`: a `PIXEL` integer column and
//!   value columns, one pixel per row; pixels not listed are invalid.
//!
//! Bad pixels are stored as UNSEEN = −1.6375e30 (or NaN); on reading they become invalid pixels
//! of the [`SkyMap`], on writing invalid pixels are stored as UNSEEN.
//! A `BAD_DATA` keyword in the table header names one more bad-pixel value, honoured on reading.
//!
//! The files are read and written through cfitsio (the C library inside the `fitsio` crate),
//! called directly: the `fitsio` crate's own wrappers panic on some legal or malformed tables
//! (unknown TFORM letters, ASCII tables), and every failure here must be a one-line [`Error`].
//! cfitsio's extended file-name syntax is never used (`ffdkopn` / `ffdkinit`), so a path means
//! exactly that file.
//!
//! Size limits, checked before any allocation: NSIDE ≤ 2^29 (the HEALPix maximum), the data
//! length must equal 12·NSIDE² (full sky) or be at most that (partial sky), the file must really
//! hold the bytes its header declares, and maps read into memory have NSIDE ≤ [`MAX_READ_NSIDE`].

use crate::error::{Error, Result};
use crate::files::write_atomically;
use crate::sky::footprint::Footprint;
use crate::sky::pixelization::{npix_of, Ordering, Pixelization};
use crate::sky::skymap::{SkyMap, UNSEEN};
use fitsio::sys;
use std::ffi::{CStr, CString};
use std::fmt;
use std::os::raw::{c_char, c_int, c_void};
use std::path::{Path, PathBuf};

/// The largest NSIDE read into memory: 12·8192² = 805,306,368 pixels, 6.4 GB as f64 values plus
/// 0.8 GB of validity flags. Larger headers are rejected before anything is allocated.
pub const MAX_READ_NSIDE: u32 = 8192;

/// Number of values per row in full-sky files (HEALPix FITS convention; healpy 1.20.1 writes the
/// same).
pub const VALUES_PER_ROW: usize = 1024;

/// FITS header/data block size (FITS standard 4.0, §3.1).
const FITS_BLOCK: u64 = 2880;

/// Declares cfitsio constants (fitsio.h) under their C names, taken from `fitsio::sys` as the
/// `c_int` the C functions take and return.
macro_rules! cfitsio_constants {
    ($($visibility:vis $name:ident),* $(,)?) => {
        $($visibility const $name: c_int = sys::$name as c_int;)*
    };
}

cfitsio_constants!(
    KEY_NO_EXIST, MEMORY_ALLOCATION, READONLY, pub(super) BINARY_TBL,
    TBYTE, TSBYTE, TSHORT, TUSHORT, TINT, TUINT, TLONG, TULONG, TLONGLONG, TULONGLONG,
    pub(super) TFLOAT, pub(super) TDOUBLE, TBIT, TLOGICAL, TSTRING, TCOMPLEX, TDBLCOMPLEX,
);

/// Which value column to read: by 0-based position among the value columns (the `PIXEL` column
/// of a partial-sky file does not count, as in healpy 1.20.1's `field`), or by name
/// (case-insensitive).
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ColumnChoice {
    /// 0-based position among the value columns.
    Position(usize),
    /// Column name (`TTYPEn`), compared case-insensitively.
    Name(String),
}

impl Default for ColumnChoice {
    /// The first value column.
    fn default() -> Self {
        ColumnChoice::Position(0)
    }
}

impl ColumnChoice {
    /// A choice from user text: all digits means a position, anything else a name.
    pub fn parse(text: &str) -> ColumnChoice {
        let t = text.trim();
        match t.parse::<usize>() {
            Ok(i) if t.chars().all(|c| c.is_ascii_digit()) => ColumnChoice::Position(i),
            _ => ColumnChoice::Name(t.to_string()),
        }
    }
}

impl std::str::FromStr for ColumnChoice {
    type Err = std::convert::Infallible;
    fn from_str(s: &str) -> std::result::Result<Self, Self::Err> {
        Ok(ColumnChoice::parse(s))
    }
}

impl fmt::Display for ColumnChoice {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ColumnChoice::Position(i) => write!(f, "column {i}"),
            ColumnChoice::Name(n) => write!(f, "column '{n}'"),
        }
    }
}

/// How the pixels of a file are indexed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum Coverage {
    /// `INDXSCHM = 'IMPLICIT'`: all 12·NSIDE² pixels in order.
    FullSky,
    /// `INDXSCHM = 'EXPLICIT'`: a PIXEL column lists the pixels present.
    Partial,
}

/// One value column of a HEALPix table.
#[derive(Debug, Clone, serde::Serialize)]
pub struct ColumnInfo {
    /// `TTYPEn` (empty when the header has none).
    pub name: String,
    /// `TFORMn` as declared, e.g. `1024E`.
    pub format: String,
    /// `TUNITn`, when present.
    pub unit: Option<String>,
    /// Values per row (the TFORM repeat count).
    pub values_per_row: u64,
    /// cfitsio type code of the stored values.
    #[serde(skip)]
    type_code: c_int,
}

/// What the header of a HEALPix FITS file says.
#[derive(Debug, Clone, serde::Serialize)]
pub struct HealpixHeader {
    /// The file read.
    pub path: PathBuf,
    /// 0-based HDU number of the HEALPix table.
    pub hdu: usize,
    /// NSIDE.
    pub nside: u32,
    /// Pixel ordering (RING when the header has no ORDERING, as healpy 1.20.1 assumes).
    pub ordering: Ordering,
    /// Full or partial sky.
    pub coverage: Coverage,
    /// `COORDSYS`, when present.
    pub coordsys: Option<String>,
    /// `BAD_DATA`, when present: a value marking bad pixels besides UNSEEN and NaN (HEALPix
    /// FITS convention).
    pub bad_data: Option<f64>,
    /// The value columns, in file order (the PIXEL column of a partial-sky file excluded).
    pub columns: Vec<ColumnInfo>,
    /// Things the reader assumed or ignored, one sentence each.
    pub warnings: Vec<String>,
    /// Number of table rows.
    pub rows: u64,
    #[serde(skip)]
    value_colnums: Vec<c_int>,
    #[serde(skip)]
    pixel_colnum: Option<c_int>,
    /// FIRSTPIX..=LASTPIX of a partial-sky file, when both are given.
    #[serde(skip)]
    pixel_range: Option<(u64, u64)>,
}

impl HealpixHeader {
    /// Names of the value columns (`#n` for an unnamed one).
    pub fn column_names(&self) -> Vec<String> {
        self.columns
            .iter()
            .enumerate()
            .map(|(i, c)| display_name(&c.name, i))
            .collect()
    }

    /// 0-based position of the chosen value column, or an error listing the columns.
    pub fn column_position(&self, choice: &ColumnChoice) -> Result<usize> {
        let list = self.column_list();
        match choice {
            ColumnChoice::Position(i) if *i < self.columns.len() => Ok(*i),
            ColumnChoice::Position(i) => Err(Error::fits(
                &self.path,
                format!(
                    "there is no value column {i} (0-based); the file has {}: {list}",
                    self.columns.len()
                ),
            )),
            ColumnChoice::Name(name) => {
                let wanted = name.trim();
                if let Some(i) = self
                    .columns
                    .iter()
                    .position(|c| c.name.trim().eq_ignore_ascii_case(wanted))
                {
                    return Ok(i);
                }
                if self.pixel_colnum.is_some() && wanted.eq_ignore_ascii_case("PIXEL") {
                    return Err(Error::fits(
                        &self.path,
                        format!(
                            "PIXEL is the pixel-index column of this partial-sky file, not a value column; value columns: {list}"
                        ),
                    ));
                }
                Err(Error::fits(
                    &self.path,
                    format!("no column named '{wanted}'; value columns: {list}"),
                ))
            }
        }
    }

    fn column_list(&self) -> String {
        self.column_names()
            .iter()
            .enumerate()
            .map(|(i, n)| format!("{i} '{n}'"))
            .collect::<Vec<_>>()
            .join(", ")
    }
}

fn display_name(name: &str, index: usize) -> String {
    if name.trim().is_empty() {
        format!("#{index}")
    } else {
        name.trim().to_string()
    }
}

/// An open HEALPix FITS file whose header has been checked; columns are read on demand.
pub struct HealpixFitsReader {
    file: FitsHandle,
    header: HealpixHeader,
    /// The pixel indices of a partial-sky file, checked, read once.
    pixels: Option<Vec<u64>>,
}

impl fmt::Debug for HealpixFitsReader {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("HealpixFitsReader")
            .field("header", &self.header)
            .finish()
    }
}

impl HealpixFitsReader {
    /// Opens `path`, finds the HEALPix table and checks its header (no pixel data read yet).
    pub fn open(path: &Path) -> Result<Self> {
        let file_len = check_file_start(path)?;
        let mut file = FitsHandle::open(path)?;
        let hdu = find_healpix_hdu(&mut file, path, file_len)?;
        let header = parse_header(&mut file, path, hdu, file_len)?;
        Ok(HealpixFitsReader {
            file,
            header,
            pixels: None,
        })
    }

    /// The checked header.
    pub fn header(&self) -> &HealpixHeader {
        &self.header
    }

    /// Reads one value column as a full-sky map (partial skies expanded, unlisted pixels invalid).
    pub fn read_map(&mut self, column: &ColumnChoice) -> Result<SkyMap> {
        let values = self.read_values(column)?;
        let pix = Pixelization::new(self.header.nside, self.header.ordering)
            .map_err(|e| Error::fits(&self.header.path, e.to_string()))?;
        let mut map =
            SkyMap::new(pix, values).map_err(|e| Error::fits(&self.header.path, e.to_string()))?;
        map.coordsys = self.header.coordsys.clone();
        Ok(map)
    }

    /// Reads one value column as a mask or weight map (bad values and unlisted pixels weigh 0;
    /// other values must lie in [0, 1]).
    pub fn read_footprint(&mut self, column: &ColumnChoice) -> Result<Footprint> {
        let values = self.read_values(column)?;
        let pix = Pixelization::new(self.header.nside, self.header.ordering)
            .map_err(|e| Error::fits(&self.header.path, e.to_string()))?;
        Footprint::from_weights(pix, values)
            .map_err(|e| Error::fits(&self.header.path, e.to_string()))
    }

    /// The full-sky values of one column, in the file's ordering, NaN where there is no value
    /// or where the value is the header's `BAD_DATA` (to a relative 1e-6, so that a float32
    /// column matches a float64 keyword).
    fn read_values(&mut self, column: &ColumnChoice) -> Result<Vec<f64>> {
        let mut values = self.read_stored_values(column)?;
        self.mark_bad_data(&mut values);
        Ok(values)
    }

    /// `values` with NaN where a value is the header's `BAD_DATA` (to a relative 1e-6, so that
    /// a float32 column matches a float64 keyword).
    fn mark_bad_data(&self, values: &mut [f64]) {
        if let Some(bad) = self.header.bad_data {
            for v in values.iter_mut() {
                if (*v - bad).abs() <= 1e-6 * bad.abs() {
                    *v = f64::NAN;
                }
            }
        }
    }

    /// The chosen value column, checked to hold real numbers: the file's path, the column's
    /// description, its 1-based cfitsio number and the name shown in messages.
    fn numeric_column(
        &self,
        column: &ColumnChoice,
    ) -> Result<(PathBuf, ColumnInfo, c_int, String)> {
        let position = self.header.column_position(column)?;
        let path = self.header.path.clone();
        let info = self.header.columns[position].clone();
        let name = display_name(&info.name, position);
        if let Some(reason) = non_numeric_reason(info.type_code, &info.format) {
            return Err(Error::fits(
                &path,
                format!("column '{name}' holds {reason}"),
            ));
        }
        Ok((path, info, self.header.value_colnums[position], name))
    }

    /// Errors unless the rows of a full-sky file hold one value per pixel in column `info`.
    fn check_full_sky_count(&self, path: &Path, name: &str, info: &ColumnInfo) -> Result<()> {
        let npix = npix_of(self.header.nside);
        let held = self.header.rows.saturating_mul(info.values_per_row);
        if held != npix {
            return Err(Error::fits(
                path,
                format!(
                    "NSIDE {} needs {npix} pixels but column '{name}' holds {held} values ({} rows × {})",
                    self.header.nside, self.header.rows, info.values_per_row
                ),
            ));
        }
        Ok(())
    }

    /// The values of pixels `start..start + count` of one column of a full-sky file, in the
    /// file's ordering, as [`Self::read_map`] reads them before bad values become invalid
    /// pixels: NaN where an integer column holds its null value or where the value is the
    /// header's `BAD_DATA`. A range of the file is read, not the whole column (cfitsio reads
    /// a column's values as one sequence across rows). Errors for a partial-sky file and a
    /// range beyond the last pixel.
    pub fn read_value_range(
        &mut self,
        column: &ColumnChoice,
        start: u64,
        count: u64,
    ) -> Result<Vec<f64>> {
        let (path, info, colnum, name) = self.numeric_column(column)?;
        let npix = npix_of(self.header.nside);
        if self.header.coverage != Coverage::FullSky {
            return Err(Error::fits(
                &path,
                "a partial-sky file is read whole, not by pixel ranges",
            ));
        }
        self.check_full_sky_count(&path, &name, &info)?;
        if start.checked_add(count).is_none_or(|end| end > npix) {
            return Err(Error::fits(
                &path,
                format!(
                    "pixels {start}.. (+{count}) lie beyond the last pixel {}",
                    npix - 1
                ),
            ));
        }
        let float_column = info.type_code == TFLOAT || info.type_code == TDOUBLE;
        let nulval = if float_column { 0.0 } else { f64::NAN };
        let per_row = info.values_per_row.max(1);
        let first = (start / per_row + 1, start % per_row + 1);
        let mut values = self
            .file
            .read_column_from(&path, colnum, first, count, Some(nulval))?;
        self.mark_bad_data(&mut values);
        Ok(values)
    }

    /// The full-sky values of one column as stored, NaN where there is no value.
    fn read_stored_values(&mut self, column: &ColumnChoice) -> Result<Vec<f64>> {
        let (path, info, colnum, name) = self.numeric_column(column)?;
        let npix = npix_of(self.header.nside);
        let count = self.header.rows.saturating_mul(info.values_per_row);
        let float_column = info.type_code == TFLOAT || info.type_code == TDOUBLE;
        match self.header.coverage {
            Coverage::FullSky => {
                self.check_full_sky_count(&path, &name, &info)?;
                self.file.read_doubles(&path, colnum, count, float_column)
            }
            Coverage::Partial => {
                self.partial_pixels()?;
                let listed_count = self.pixels.as_ref().map_or(0, |p| p.len() as u64);
                if count != listed_count {
                    return Err(Error::fits(
                        &path,
                        format!(
                            "column '{name}' holds {count} values but the PIXEL column lists {listed_count} pixels"
                        ),
                    ));
                }
                let listed = self.file.read_doubles(&path, colnum, count, float_column)?;
                let pixels = self.pixels.as_deref().unwrap_or(&[]);
                let mut values = allocate(&path, npix as usize, f64::NAN)?;
                for (&p, &v) in pixels.iter().zip(&listed) {
                    values[p as usize] = v;
                }
                Ok(values)
            }
        }
    }

    /// The checked pixel list of a partial-sky file (in range, no repeats).
    fn partial_pixels(&mut self) -> Result<()> {
        if self.pixels.is_none() {
            let path = self.header.path.clone();
            let colnum = self.header.pixel_colnum.unwrap_or(1);
            let (_, repeat) = self.file.column_type(&path, colnum)?;
            let count = self.header.rows.saturating_mul(repeat);
            let npix = npix_of(self.header.nside);
            if count > npix {
                return Err(Error::fits(
                    &path,
                    format!(
                        "the PIXEL column lists {count} pixels but NSIDE {} has only {npix}",
                        self.header.nside
                    ),
                ));
            }
            let raw = self.file.read_longs(&path, colnum, count)?;
            // One bit per pixel (NSIDE 8192: 100 MB) records which pixels were seen.
            let mut seen = allocate(&path, npix.div_ceil(64) as usize, 0u64)?;
            let mut pixels = Vec::with_capacity(raw.len());
            let (lo, hi) = self.header_pixel_range(npix);
            for (k, &p) in raw.iter().enumerate() {
                if p < 0 || p as u64 >= npix {
                    return Err(Error::fits(
                        &path,
                        format!(
                            "PIXEL entry {k} is {p}, outside 0..={} for NSIDE {}",
                            npix - 1,
                            self.header.nside
                        ),
                    ));
                }
                let p = p as u64;
                if p < lo || p > hi {
                    return Err(Error::fits(
                        &path,
                        format!("PIXEL entry {k} is {p}, outside FIRSTPIX..=LASTPIX = {lo}..={hi}"),
                    ));
                }
                let (word, bit) = ((p / 64) as usize, 1u64 << (p % 64));
                if seen[word] & bit != 0 {
                    let first = raw.iter().position(|&q| q as u64 == p).unwrap_or(k);
                    return Err(Error::fits(
                        &path,
                        format!("pixel {p} is listed twice in the PIXEL column (entries {first} and {k})"),
                    ));
                }
                seen[word] |= bit;
                pixels.push(p);
            }
            self.pixels = Some(pixels);
        }
        Ok(())
    }

    fn header_pixel_range(&self, npix: u64) -> (u64, u64) {
        self.header.pixel_range.unwrap_or((0, npix - 1))
    }
}

/// Reads one column of a HEALPix FITS file as a map, with the header it came from.
pub fn read_map(path: &Path, column: &ColumnChoice) -> Result<(SkyMap, HealpixHeader)> {
    let mut reader = HealpixFitsReader::open(path)?;
    let map = reader.read_map(column)?;
    Ok((map, reader.header))
}

/// Reads one column of a HEALPix FITS file as a mask or weight map, with its header.
pub fn read_footprint(path: &Path, column: &ColumnChoice) -> Result<(Footprint, HealpixHeader)> {
    let mut reader = HealpixFitsReader::open(path)?;
    let footprint = reader.read_footprint(column)?;
    Ok((footprint, reader.header))
}

/// The coordinate system a COORDSYS value names, by the HEALPix FITS convention ('G'
/// galactic, 'E' ecliptic, 'C' or 'Q' equatorial; full words are taken by their first letter).
pub fn coordinate_system(value: &str) -> String {
    let v = value.trim().to_uppercase();
    match v.chars().next() {
        Some('G') => "galactic".into(),
        Some('E') => "ecliptic".into(),
        Some('C') | Some('Q') => "equatorial".into(),
        _ => v,
    }
}

/// Refuses two files whose COORDSYS headers name different coordinate systems (when both
/// state one), unless `allow`: a mask in galactic coordinates on an equatorial map cuts the
/// wrong sky without any other sign.
pub fn check_same_coordsys(
    first: (&str, Option<&str>),
    second: (&str, Option<&str>),
    allow: bool,
) -> Result<()> {
    if allow {
        return Ok(());
    }
    if let ((a, Some(sa)), (b, Some(sb))) = (first, second) {
        let (ca, cb) = (coordinate_system(sa), coordinate_system(sb));
        if ca != cb {
            return Err(Error::Mismatch(format!(
                "{a} is in {ca} coordinates (COORDSYS '{}') but {b} in {cb} (COORDSYS '{}'): \
                 bring both to one system, or pass --allow-coordsys-mismatch if a header is wrong",
                sa.trim(),
                sb.trim()
            )));
        }
    }
    Ok(())
}

/// Stored type of the value columns.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ValuePrecision {
    /// IEEE float32, `TFORM 'E'` (half the size; about 7 significant digits).
    Float32,
    /// IEEE float64, `TFORM 'D'`.
    #[default]
    Float64,
}

/// Integer type of the PIXEL column of a partial-sky file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum PixelIndexWidth {
    /// `TFORM 'J'`, enough up to NSIDE 8192.
    Int32,
    /// `TFORM 'K'`, any NSIDE.
    #[default]
    Int64,
}

/// Full-sky or partial-sky layout of a written file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum WriteLayout {
    /// All pixels, `INDXSCHM = 'IMPLICIT'`, rows of 1024 values (one value per row when the pixel
    /// count is not a multiple of 1024).
    #[default]
    FullSky,
    /// Only pixels valid in at least one column, with a PIXEL column; `INDXSCHM = 'EXPLICIT'`.
    Partial(PixelIndexWidth),
}

/// How to write a HEALPix FITS file.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct WriteOptions {
    /// Stored type of the values.
    pub precision: ValuePrecision,
    /// Full or partial sky.
    pub layout: WriteLayout,
    /// `COORDSYS` to write; `None` takes the first map's own, and writes none if it has none.
    pub coordsys: Option<String>,
}

/// Writes one map as a HEALPix FITS file (see [`write_maps`]).
pub fn write_map(
    path: &Path,
    column_name: &str,
    map: &SkyMap,
    options: &WriteOptions,
) -> Result<()> {
    write_maps(path, &[(column_name, map)], options)
}

/// Writes a mask or weight map as a HEALPix FITS file (see [`write_maps`]).
pub fn write_footprint(
    path: &Path,
    column_name: &str,
    footprint: &Footprint,
    options: &WriteOptions,
) -> Result<()> {
    let map = SkyMap::new(footprint.pixelization(), footprint.weights().to_vec())?;
    write_maps(path, &[(column_name, &map)], options)
}

/// Writes named maps of one pixelization as the columns of a HEALPix FITS binary table in HDU 1,
/// with the keywords PIXTYPE, ORDERING, NSIDE, INDXSCHM, OBJECT, FIRSTPIX/LASTPIX (full sky) and
/// COORDSYS (when known). Invalid pixels are stored as UNSEEN. The file is written to a temporary
/// file renamed into place, so an existing `path` is replaced only on success.
pub fn write_maps(path: &Path, columns: &[(&str, &SkyMap)], options: &WriteOptions) -> Result<()> {
    let Some(&(_, first)) = columns.first() else {
        return Err(Error::Setting(
            "a HEALPix FITS file needs at least one map column".to_string(),
        ));
    };
    let pix = first.pixelization();
    let names = checked_column_names(columns, options.layout)?;
    let coordsys = options.coordsys.clone().or_else(|| first.coordsys.clone());
    if let Some(c) = &coordsys {
        check_header_text("COORDSYS", c)?;
    }
    let (pixels, repeat) = written_pixels(columns, pix, options.layout)?;
    let rows = match &pixels {
        Some(p) => p.len() as u64,
        None => pix.npix() / repeat,
    };
    let (ttype, tform) = table_layout(&names, options, pixels.is_some(), repeat);

    write_atomically(path, |tmp| {
        let mut file = FitsHandle::create(tmp, path)?;
        file.create_table(rows, &ttype, &tform, "SKY_MAP")
            .map_err(|s| write_failure(path, "the table", s))?;
        let partial = pixels.is_some();
        for (key, value, comment) in &healpix_keys(pix, coordsys.as_deref(), partial) {
            file.write_key(key, value, comment)
                .map_err(|s| write_failure(path, &format!("keyword {key}"), s))?;
        }
        match &pixels {
            None => write_full_sky_columns(&mut file, path, columns, options.precision, repeat)?,
            Some(listed) => {
                write_partial_columns(&mut file, path, columns, options.precision, listed)?
            }
        }
        file.close().map_err(|s| write_failure(path, "the file", s))
    })
}

/// The one-line error of a failed cfitsio write.
fn write_failure(path: &Path, what: &str, status: c_int) -> Error {
    cfitsio_failure(path, format_args!("cannot write {what}"), status)
}

/// The one-line error on `path` of a cfitsio call that failed with `status`: `{failed} ({what
/// cfitsio says})`.
fn cfitsio_failure(path: &Path, failed: impl fmt::Display, status: c_int) -> Error {
    Error::fits(path, format!("{failed} ({})", cfitsio_text(status)))
}

/// `Ok` when a cfitsio call returned `status` 0, otherwise its [`cfitsio_failure`].
fn cfitsio_checked(path: &Path, failed: impl fmt::Display, status: c_int) -> Result<()> {
    match status {
        0 => Ok(()),
        _ => Err(cfitsio_failure(path, failed, status)),
    }
}

/// The trimmed column names, once each checked: printable, not repeated, not PIXEL in a
/// partial-sky file, and every map of the first one's pixelization.
fn checked_column_names(columns: &[(&str, &SkyMap)], layout: WriteLayout) -> Result<Vec<String>> {
    let Some(&(first_name, first)) = columns.first() else {
        return Ok(Vec::new());
    };
    let pix = first.pixelization();
    let mut names: Vec<String> = Vec::with_capacity(columns.len());
    for &(name, map) in columns {
        check_header_text("column name", name)?;
        let name = name.trim();
        if names.iter().any(|n| n.eq_ignore_ascii_case(name)) {
            return Err(Error::Setting(format!(
                "column name '{name}' is used twice"
            )));
        }
        if matches!(layout, WriteLayout::Partial(_)) && name.eq_ignore_ascii_case("PIXEL") {
            return Err(Error::Setting(
                "'PIXEL' names the pixel-index column of a partial-sky file; choose another column name"
                    .to_string(),
            ));
        }
        if map.pixelization() != pix {
            return Err(Error::Mismatch(format!(
                "column '{name}' has NSIDE {} {} but column '{}' has NSIDE {} {}",
                map.nside(),
                map.ordering(),
                first_name.trim(),
                pix.nside(),
                pix.ordering()
            )));
        }
        names.push(name.to_string());
    }
    Ok(names)
}

/// Which pixels are written (`None`: all, in order) and how many values each row holds: a full
/// sky packs [`VALUES_PER_ROW`] values a row when they divide the map; a partial sky lists the
/// pixels valid in any column, one a row.
fn written_pixels(
    columns: &[(&str, &SkyMap)],
    pix: Pixelization,
    layout: WriteLayout,
) -> Result<(Option<Vec<i64>>, u64)> {
    let npix = pix.npix();
    match layout {
        WriteLayout::FullSky => {
            let repeat = if npix.is_multiple_of(VALUES_PER_ROW as u64) {
                VALUES_PER_ROW as u64
            } else {
                1
            };
            Ok((None, repeat))
        }
        WriteLayout::Partial(width) => {
            if width == PixelIndexWidth::Int32 && npix > i32::MAX as u64 {
                return Err(Error::Setting(format!(
                    "32-bit pixel indices cannot number the {npix} pixels of NSIDE {}; use 64-bit indices",
                    pix.nside()
                )));
            }
            let listed: Vec<i64> = (0..npix as usize)
                .filter(|&p| columns.iter().any(|(_, m)| m.valid()[p]))
                .map(|p| p as i64)
                .collect();
            if listed.is_empty() {
                return Err(Error::Data(
                    "a partial-sky file needs at least one valid pixel, and every pixel is invalid"
                        .to_string(),
                ));
            }
            Ok((Some(listed), 1))
        }
    }
}

/// TTYPE and TFORM of every column: the pixel indices first in a partial-sky file, then the maps.
fn table_layout(
    names: &[String],
    options: &WriteOptions,
    partial: bool,
    repeat: u64,
) -> (Vec<String>, Vec<String>) {
    let value_letter = match options.precision {
        ValuePrecision::Float32 => 'E',
        ValuePrecision::Float64 => 'D',
    };
    let mut ttype: Vec<String> = Vec::new();
    let mut tform: Vec<String> = Vec::new();
    if let (true, WriteLayout::Partial(width)) = (partial, options.layout) {
        ttype.push("PIXEL".to_string());
        tform.push(match width {
            PixelIndexWidth::Int32 => "1J".to_string(),
            PixelIndexWidth::Int64 => "1K".to_string(),
        });
    }
    for name in names {
        ttype.push(name.clone());
        tform.push(format!("{repeat}{value_letter}"));
    }
    (ttype, tform)
}

/// The HEALPix keywords of the table, in the order they are written.
fn healpix_keys(
    pix: Pixelization,
    coordsys: Option<&str>,
    partial: bool,
) -> Vec<(&'static str, KeyValue, &'static str)> {
    [
        Some((
            "PIXTYPE",
            KeyValue::Text("HEALPIX".into()),
            "HEALPIX pixelisation",
        )),
        Some((
            "ORDERING",
            KeyValue::Text(pix.ordering().fits_name().into()),
            "Pixel ordering scheme, either RING or NESTED",
        )),
        coordsys.map(|c| {
            (
                "COORDSYS",
                KeyValue::Text(c.trim().to_string()),
                "Ecliptic, Galactic or Celestial (equatorial)",
            )
        }),
        Some((
            "NSIDE",
            KeyValue::Integer(pix.nside() as i64),
            "Resolution parameter of HEALPIX",
        )),
        (!partial).then_some(("FIRSTPIX", KeyValue::Integer(0), "First pixel # (0 based)")),
        (!partial).then(|| {
            (
                "LASTPIX",
                KeyValue::Integer(pix.npix() as i64 - 1),
                "Last pixel # (0 based)",
            )
        }),
        Some((
            "INDXSCHM",
            KeyValue::Text(if partial { "EXPLICIT" } else { "IMPLICIT" }.into()),
            "Indexing: IMPLICIT or EXPLICIT",
        )),
        Some((
            "OBJECT",
            KeyValue::Text(if partial { "PARTIAL" } else { "FULLSKY" }.into()),
            "Sky coverage, either FULLSKY or PARTIAL",
        )),
    ]
    .into_iter()
    .flatten()
    .collect()
}

/// Writes every map of a full-sky file into columns 1, 2, … in chunks of [`WRITE_CHUNK`]
/// values, invalid pixels as UNSEEN.
fn write_full_sky_columns(
    file: &mut FitsHandle,
    path: &Path,
    columns: &[(&str, &SkyMap)],
    precision: ValuePrecision,
    repeat: u64,
) -> Result<()> {
    for (k, (name, map)) in columns.iter().enumerate() {
        let values = map.values();
        let valid = map.valid();
        let mut start = 0usize;
        let mut buf = Vec::with_capacity(WRITE_CHUNK.min(values.len()));
        while start < values.len() {
            let end = (start + WRITE_CHUNK).min(values.len());
            buf.clear();
            buf.extend(
                values[start..end]
                    .iter()
                    .zip(valid.range(start..end))
                    .map(|(&v, &ok)| if ok { v } else { UNSEEN }),
            );
            check_range(path, name, precision, &buf, |i| (start + i) as u64)?;
            file.write_doubles(1 + k as c_int, repeat, start as u64, &mut buf)
                .map_err(|s| write_failure(path, &format!("column '{}'", name.trim()), s))?;
            start = end;
        }
    }
    Ok(())
}

/// Writes the listed pixel indices into column 1 and each map's values at them into columns
/// 2, 3, …
fn write_partial_columns(
    file: &mut FitsHandle,
    path: &Path,
    columns: &[(&str, &SkyMap)],
    precision: ValuePrecision,
    listed: &[i64],
) -> Result<()> {
    let mut idx = listed.to_vec();
    file.write_longs(1, &mut idx)
        .map_err(|s| write_failure(path, "the PIXEL column", s))?;
    for (k, (name, map)) in columns.iter().enumerate() {
        let mut buf: Vec<f64> = listed
            .iter()
            .map(|&p| map.get(p as u64).unwrap_or(UNSEEN))
            .collect();
        check_range(path, name, precision, &buf, |i| listed[i] as u64)?;
        file.write_doubles(2 + k as c_int, 1, 0, &mut buf)
            .map_err(|s| write_failure(path, &format!("column '{}'", name.trim()), s))?;
    }
    Ok(())
}

/// Refuses values that float32 cannot hold (cfitsio would silently store ±∞ for them).
fn check_range(
    path: &Path,
    column: &str,
    precision: ValuePrecision,
    values: &[f64],
    pixel_of: impl Fn(usize) -> u64,
) -> Result<()> {
    if precision == ValuePrecision::Float64 {
        return Ok(());
    }
    match values.iter().position(|v| v.abs() > f32::MAX as f64) {
        None => Ok(()),
        Some(i) => Err(Error::fits(
            path,
            format!(
                "pixel {} of column '{}' holds {:e}, beyond the float32 range (±3.4e38); write float64 instead",
                pixel_of(i),
                column.trim(),
                values[i]
            ),
        )),
    }
}

/// Values written per cfitsio call (bounds the temporary buffer to 8 MB).
const WRITE_CHUNK: usize = 1 << 20;

/// Header text must be printable ASCII and fit a FITS card (at most 68 characters).
fn check_header_text(what: &str, text: &str) -> Result<()> {
    let t = text.trim();
    if t.is_empty() {
        return Err(Error::Setting(format!("a {what} is empty")));
    }
    if t.len() > 68 || !t.chars().all(|c| (' '..='~').contains(&c)) {
        return Err(Error::Setting(format!(
            "{what} '{t}' must be printable ASCII of at most 68 characters"
        )));
    }
    Ok(())
}

enum KeyValue {
    Text(String),
    Integer(i64),
}

/// A cfitsio status as a result: 0 is success, anything else the failing status.
fn status_result(status: c_int) -> std::result::Result<(), c_int> {
    if status == 0 {
        Ok(())
    } else {
        Err(status)
    }
}

/// A Rust type cfitsio reads table values into, with its cfitsio datatype code.
trait ColumnValue: Copy + Default {
    const DATATYPE: c_int;
}

impl ColumnValue for f64 {
    const DATATYPE: c_int = TDOUBLE;
}

impl ColumnValue for i64 {
    const DATATYPE: c_int = TLONGLONG;
}

// ---------------------------------------------------------------------------------------------
// Header checks.

/// Size of the file, after checking it exists and starts like a FITS file.
/// Reads the first `start.len()` bytes of a file (fewer when it is shorter); how many were read.
pub fn read_file_start(path: &Path, start: &mut [u8]) -> Result<usize> {
    use std::io::Read;
    let mut f = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
    let mut got = 0;
    while got < start.len() {
        match f.read(&mut start[got..]) {
            Ok(0) => break,
            Ok(n) => got += n,
            Err(e) => return Err(Error::io(path, e)),
        }
    }
    Ok(got)
}

/// FITS files begin with this card start (FITS standard 4.0, §4.4.1).
pub const FITS_SIGNATURE: &[u8; 9] = b"SIMPLE  =";

pub(super) fn check_file_start(path: &Path) -> Result<u64> {
    let meta = std::fs::metadata(path).map_err(|e| match e.kind() {
        std::io::ErrorKind::NotFound => Error::io(path, "no such file"),
        _ => Error::io(path, e),
    })?;
    if meta.is_dir() {
        return Err(Error::io(path, "is a directory, not a FITS file"));
    }
    crate::files::require_regular_input(path)?;
    let mut start = [0u8; 9];
    let got = read_file_start(path, &mut start)?;
    if got == 0 {
        return Err(Error::fits(path, "not a FITS file: the file is empty"));
    }
    if start[..got].starts_with(&[0x1f, 0x8b]) {
        return Err(Error::fits(
            path,
            "is gzip-compressed; decompress it first (gunzip), planisphere reads plain FITS files",
        ));
    }
    if &start[..got] != FITS_SIGNATURE {
        return Err(Error::fits(
            path,
            "not a FITS file: it does not begin with the FITS keyword SIMPLE",
        ));
    }
    Ok(meta.len())
}

pub(super) fn truncated_or_damaged(path: &Path, file_len: u64, detail: String) -> Error {
    if !file_len.is_multiple_of(FITS_BLOCK) {
        Error::fits(
            path,
            format!(
                "truncated FITS file: its {file_len} bytes are not a whole number of 2880-byte FITS blocks ({detail})"
            ),
        )
    } else {
        Error::fits(path, format!("damaged FITS file: {detail}"))
    }
}

/// 0-based HDU of the HEALPix table, with any warning about how it was chosen.
fn find_healpix_hdu(
    file: &mut FitsHandle,
    path: &Path,
    file_len: u64,
) -> Result<(usize, Option<String>)> {
    const MAX_HDUS: usize = 1000;
    let mut unlabelled: Option<usize> = None;
    let mut other: Option<(usize, String)> = None;
    let mut hdu_count = 1;
    for hdu in 1..MAX_HDUS {
        let kind = match file.move_to(hdu) {
            Ok(kind) => kind,
            Err(status) if status == sys::END_OF_FILE as c_int => {
                if !file_len.is_multiple_of(FITS_BLOCK) {
                    return Err(truncated_or_damaged(
                        path,
                        file_len,
                        format!("HDU {hdu} is incomplete"),
                    ));
                }
                break;
            }
            Err(status) => {
                return Err(truncated_or_damaged(
                    path,
                    file_len,
                    format!("HDU {hdu} cannot be read, {}", cfitsio_text(status)),
                ))
            }
        };
        hdu_count = hdu + 1;
        if kind != BINARY_TBL {
            continue;
        }
        let pixtype = file.key(path, "PIXTYPE")?.map(|v| unquote(&v));
        match pixtype {
            Some(p) if p.eq_ignore_ascii_case("HEALPIX") => return Ok((hdu, None)),
            Some(p) => {
                other.get_or_insert((hdu, p));
            }
            None => {
                unlabelled.get_or_insert(hdu);
            }
        }
    }
    if let Some(hdu) = unlabelled {
        return Ok((
            hdu,
            Some(format!(
                "HDU {hdu} has no PIXTYPE keyword; reading it as a HEALPix table"
            )),
        ));
    }
    if let Some((hdu, p)) = other {
        return Err(Error::fits(
            path,
            format!("PIXTYPE is '{p}' in HDU {hdu}, not 'HEALPIX': this is not a HEALPix map"),
        ));
    }
    Err(Error::fits(
        path,
        format!(
            "no binary-table extension, so no HEALPix map ({hdu_count} HDU{} in the file)",
            if hdu_count == 1 { "" } else { "s" }
        ),
    ))
}

/// The text of a FITS string value: quotes removed, doubled quotes undone, blanks trimmed.
fn unquote(raw: &str) -> String {
    let t = raw.trim();
    if t.len() >= 2 && t.starts_with('\'') && t.ends_with('\'') {
        t[1..t.len() - 1].replace("''", "'").trim().to_string()
    } else {
        t.to_string()
    }
}

/// An integer keyword value (a quoted or integral floating value is accepted).
fn parse_integer(raw: &str) -> Option<i64> {
    let t = unquote(raw);
    if let Ok(i) = t.parse::<i64>() {
        return Some(i);
    }
    let x: f64 = t.replace(['D', 'd'], "E").parse().ok()?;
    (x.fract() == 0.0 && x.abs() < 9.0e18).then_some(x as i64)
}

fn is_integer_type(code: c_int) -> bool {
    matches!(
        code,
        TBYTE | TSBYTE | TSHORT | TUSHORT | TINT | TUINT | TLONG | TULONG | TLONGLONG | TULONGLONG
    )
}

fn is_numeric_type(code: c_int) -> bool {
    is_integer_type(code) || code == TFLOAT || code == TDOUBLE
}

/// Why a column of this type cannot hold map values, or `None` when it can.
pub(super) fn non_numeric_reason(code: c_int, format: &str) -> Option<String> {
    if is_numeric_type(code) {
        return None;
    }
    let what = match code {
        c if c < 0 => "variable-length arrays",
        TSTRING => "text",
        TLOGICAL => "logical values",
        TBIT => "bits",
        TCOMPLEX | TDBLCOMPLEX => "complex numbers",
        _ => "values of an unsupported type",
    };
    Some(format!("{what} (TFORM '{format}'), not real numbers"))
}

/// A text keyword of the current HDU without its quotes, `None` when absent or blank.
pub(super) fn text_key(file: &mut FitsHandle, path: &Path, key: &str) -> Result<Option<String>> {
    Ok(file
        .key(path, key)?
        .map(|v| unquote(&v))
        .filter(|v| !v.is_empty()))
}

/// An integer keyword of the current HDU, `None` when absent, an error when not an integer.
fn int_key(file: &mut FitsHandle, path: &Path, key: &str) -> Result<Option<i64>> {
    match file.key(path, key)? {
        None => Ok(None),
        Some(raw) => parse_integer(&raw)
            .map(Some)
            .ok_or_else(|| Error::fits(path, format!("{key} = {} is not an integer", raw.trim()))),
    }
}

/// One column of the table as the header declares it.
struct HeaderColumn {
    colnum: c_int,
    info: ColumnInfo,
    code: c_int,
}

/// NSIDE, ORDERING and the pixel count the header declares, checked against the HEALPix
/// convention; a disagreeing NPIX only warns.
fn read_resolution(
    file: &mut FitsHandle,
    path: &Path,
    hdu: usize,
    warnings: &mut Vec<String>,
) -> Result<(u32, Ordering, u64)> {
    let nside = int_key(file, path, "NSIDE")?.ok_or_else(|| {
        Error::fits(
            path,
            format!("HDU {hdu} has no NSIDE keyword, which the HEALPix FITS convention requires"),
        )
    })?;
    let ordering = match text_key(file, path, "ORDERING")? {
        None => {
            warnings.push("no ORDERING keyword: assuming RING, as healpy 1.20.1 does".to_string());
            Ordering::Ring
        }
        Some(o) => Ordering::parse(&o).ok_or_else(|| {
            Error::fits(path, format!("ORDERING '{o}' is neither RING nor NESTED"))
        })?,
    };
    let nside_u32 = u32::try_from(nside).unwrap_or(0);
    if nside_u32 == 0 || nside_u32 > crate::sky::pixelization::NSIDE_MAX {
        return Err(Error::fits(
            path,
            format!(
                "NSIDE {nside} is out of range (1 to {})",
                crate::sky::pixelization::NSIDE_MAX
            ),
        ));
    }
    Pixelization::new(nside_u32, ordering).map_err(|e| Error::fits(path, e.to_string()))?;
    let npix = npix_of(nside_u32);
    if let Some(n) = int_key(file, path, "NPIX").ok().flatten() {
        if n != npix as i64 {
            warnings.push(format!(
                "NPIX = {n} disagrees with NSIDE {nside} (12·NSIDE² = {npix}); NSIDE is trusted"
            ));
        }
    }
    Ok((nside_u32, ordering, npix))
}

/// The BAD_DATA keyword (Fortran `D` exponents accepted), which must be a finite number.
fn read_bad_data(file: &mut FitsHandle, path: &Path) -> Result<Option<f64>> {
    let Some(raw) = file.key(path, "BAD_DATA")? else {
        return Ok(None);
    };
    let text = unquote(&raw).replace(['D', 'd'], "E");
    match text.trim().parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(Some(v)),
        _ => Err(Error::fits(
            path,
            format!("BAD_DATA = {} is not a finite number", raw.trim()),
        )),
    }
}

/// Every column's TTYPE, TFORM, TUNIT and stored type, in order.
fn read_columns(file: &mut FitsHandle, path: &Path, ncols: c_int) -> Result<Vec<HeaderColumn>> {
    let mut cols = Vec::with_capacity(ncols as usize);
    for colnum in 1..=ncols {
        let name = text_key(file, path, &format!("TTYPE{colnum}"))?.unwrap_or_default();
        let format = text_key(file, path, &format!("TFORM{colnum}"))?.unwrap_or_default();
        let unit = text_key(file, path, &format!("TUNIT{colnum}"))?;
        let (code, repeat) = file.column_type(path, colnum)?;
        cols.push(HeaderColumn {
            colnum,
            info: ColumnInfo {
                name,
                format,
                unit,
                values_per_row: repeat,
                type_code: code,
            },
            code,
        });
    }
    Ok(cols)
}

fn is_pixel_column(c: &HeaderColumn) -> bool {
    c.info.name.trim().eq_ignore_ascii_case("PIXEL")
}

/// Full or partial sky (healpy 1.20.1 reads OBJECT, then INDXSCHM, and rejects a
/// contradiction); with neither keyword, a table with a PIXEL column beside values is partial.
fn read_coverage(
    file: &mut FitsHandle,
    path: &Path,
    cols: &[HeaderColumn],
    warnings: &mut Vec<String>,
) -> Result<Coverage> {
    let object = text_key(file, path, "OBJECT")?.map(|o| o.to_ascii_uppercase());
    let object_says = match object.as_deref() {
        Some("FULLSKY") => Some(Coverage::FullSky),
        Some("PARTIAL") => Some(Coverage::Partial),
        _ => None,
    };
    let scheme_says = match text_key(file, path, "INDXSCHM")? {
        None => None,
        Some(s) => match s.to_ascii_uppercase().as_str() {
            "IMPLICIT" => Some(Coverage::FullSky),
            "EXPLICIT" => Some(Coverage::Partial),
            _ => {
                return Err(Error::fits(
                    path,
                    format!("INDXSCHM '{s}' is neither IMPLICIT nor EXPLICIT"),
                ))
            }
        },
    };
    let has_pixel_column = cols.iter().any(is_pixel_column);
    Ok(match (object_says, scheme_says) {
        (Some(o), Some(s)) if o != s => {
            return Err(Error::fits(
                path,
                format!(
                    "OBJECT '{}' contradicts INDXSCHM '{}'",
                    object.as_deref().unwrap_or(""),
                    if s == Coverage::Partial {
                        "EXPLICIT"
                    } else {
                        "IMPLICIT"
                    }
                ),
            ))
        }
        (_, Some(s)) => s,
        (Some(o), None) => o,
        (None, None) if has_pixel_column && cols.len() >= 2 => {
            warnings.push(
                "no INDXSCHM or OBJECT keyword: the table has a PIXEL column, so it is read as a partial sky"
                    .to_string(),
            );
            Coverage::Partial
        }
        (None, None) => Coverage::FullSky,
    })
}

/// Removes the pixel-index column of a partial-sky table from `cols` (the one named PIXEL, or
/// else the first, as healpy 1.20.1 does) and returns its column number, after checking it holds
/// integers and no more indices than the map has pixels.
fn take_pixel_column(
    path: &Path,
    cols: &mut Vec<HeaderColumn>,
    rows: u64,
    nside: u32,
    npix: u64,
    warnings: &mut Vec<String>,
) -> Result<c_int> {
    let k = match cols.iter().position(is_pixel_column) {
        Some(k) => k,
        None => {
            let first = cols
                .first()
                .map(|c| c.info.name.clone())
                .unwrap_or_default();
            warnings.push(format!(
                "no column named PIXEL: taking the first column '{}' as the pixel indices, as healpy 1.20.1 does",
                first.trim()
            ));
            0
        }
    };
    let Some(c) = (k < cols.len()).then(|| cols.remove(k)) else {
        return Err(Error::fits(path, "the partial-sky table has no columns"));
    };
    if !is_integer_type(c.code) {
        return Err(Error::fits(
            path,
            format!(
                "the pixel-index column '{}' has TFORM '{}'; pixel indices must be integers",
                c.info.name.trim(),
                c.info.format
            ),
        ));
    }
    if rows.saturating_mul(c.info.values_per_row) > npix {
        return Err(Error::fits(
            path,
            format!(
                "the PIXEL column lists {} pixels but NSIDE {nside} has only {npix}",
                rows.saturating_mul(c.info.values_per_row)
            ),
        ));
    }
    Ok(c.colnum)
}

/// FIRSTPIX / LASTPIX: a full sky must span every pixel; a partial sky may declare its range.
fn read_pixel_range(
    file: &mut FitsHandle,
    path: &Path,
    coverage: Coverage,
    nside: u32,
    npix: u64,
) -> Result<Option<(u64, u64)>> {
    let first = int_key(file, path, "FIRSTPIX")?;
    let last = int_key(file, path, "LASTPIX")?;
    match coverage {
        Coverage::FullSky => {
            let f = first.unwrap_or(0);
            let l = last.unwrap_or(npix as i64 - 1);
            if f != 0 || l != npix as i64 - 1 {
                return Err(Error::fits(
                    path,
                    format!(
                        "FIRSTPIX {f} and LASTPIX {l} do not match a full-sky NSIDE {nside} map (expected 0 and {})",
                        npix - 1
                    ),
                ));
            }
            Ok(None)
        }
        Coverage::Partial => match (first, last) {
            (Some(f), Some(l)) => {
                if f < 0 || f > l || l >= npix as i64 {
                    return Err(Error::fits(
                        path,
                        format!(
                            "FIRSTPIX {f} and LASTPIX {l} are not a pixel range of NSIDE {nside} (0 to {})",
                            npix - 1
                        ),
                    ));
                }
                Ok(Some((f as u64, l as u64)))
            }
            _ => Ok(None),
        },
    }
}

/// Data length of every numeric value column, checked before anything is allocated.
fn check_column_lengths(
    path: &Path,
    cols: &[HeaderColumn],
    coverage: Coverage,
    rows: u64,
    nside: u32,
    npix: u64,
) -> Result<()> {
    for (i, c) in cols.iter().enumerate() {
        if !is_numeric_type(c.code) {
            continue;
        }
        let count = rows.saturating_mul(c.info.values_per_row);
        let name = display_name(&c.info.name, i);
        match coverage {
            Coverage::FullSky if count != npix => {
                return Err(Error::fits(
                    path,
                    format!(
                        "NSIDE {nside} needs {npix} pixels but column '{name}' holds {count} values ({rows} rows × {})",
                        c.info.values_per_row
                    ),
                ))
            }
            Coverage::Partial if c.info.values_per_row != 1 => {
                return Err(Error::fits(
                    path,
                    format!(
                        "column '{name}' of a partial-sky table has {} values per row; the convention has one, beside its PIXEL",
                        c.info.values_per_row
                    ),
                ))
            }
            _ => {}
        }
    }
    Ok(())
}

/// The file must hold the table data its header declares.
pub(super) fn check_data_present(
    file: &mut FitsHandle,
    path: &Path,
    hdu: usize,
    rows: u64,
    file_len: u64,
) -> Result<()> {
    let row_bytes = int_key(file, path, "NAXIS1")?.unwrap_or(0).max(0) as u64;
    let data_start = file.data_start(path)?;
    let declared = row_bytes.saturating_mul(rows);
    let present = file_len.saturating_sub(data_start);
    if declared > present {
        return Err(Error::fits(
            path,
            format!(
                "truncated FITS file: the table in HDU {hdu} declares {declared} bytes of data but only {present} are present"
            ),
        ));
    }
    Ok(())
}

fn parse_header(
    file: &mut FitsHandle,
    path: &Path,
    found: (usize, Option<String>),
    file_len: u64,
) -> Result<HealpixHeader> {
    let (hdu, hdu_warning) = found;
    let mut warnings: Vec<String> = hdu_warning.into_iter().collect();
    file.move_to(hdu).map_err(|s| {
        truncated_or_damaged(
            path,
            file_len,
            format!("HDU {hdu} cannot be read, {}", cfitsio_text(s)),
        )
    })?;
    let (nside, ordering, npix) = read_resolution(file, path, hdu, &mut warnings)?;
    let coordsys = text_key(file, path, "COORDSYS")?;
    let bad_data = read_bad_data(file, path)?;
    let ncols = file.num_cols(path)?;
    let rows = file.num_rows(path)?;
    let mut cols = read_columns(file, path, ncols)?;
    let coverage = read_coverage(file, path, &cols, &mut warnings)?;
    let pixel_colnum = match coverage {
        Coverage::Partial => Some(take_pixel_column(
            path,
            &mut cols,
            rows,
            nside,
            npix,
            &mut warnings,
        )?),
        Coverage::FullSky => None,
    };
    if cols.is_empty() {
        return Err(Error::fits(path, "the HEALPix table has no value column"));
    }
    let pixel_range = read_pixel_range(file, path, coverage, nside, npix)?;
    check_column_lengths(path, &cols, coverage, rows, nside, npix)?;
    if nside > MAX_READ_NSIDE {
        return Err(Error::fits(
            path,
            format!(
                "NSIDE {nside} is above {MAX_READ_NSIDE}, the largest map planisphere reads into memory"
            ),
        ));
    }
    check_data_present(file, path, hdu, rows, file_len)?;
    let (value_colnums, columns) = cols.into_iter().map(|c| (c.colnum, c.info)).unzip();
    Ok(HealpixHeader {
        path: path.to_path_buf(),
        hdu,
        nside,
        ordering,
        coverage,
        coordsys,
        bad_data,
        columns,
        warnings,
        rows,
        value_colnums,
        pixel_colnum,
        pixel_range,
    })
}

/// A vector of `len` copies of `fill`, or a one-line error when memory runs out.
fn allocate<T: Clone>(path: &Path, len: usize, fill: T) -> Result<Vec<T>> {
    let mut v = Vec::new();
    v.try_reserve_exact(len)
        .map_err(|_| Error::fits(path, format!("not enough memory for {len} values")))?;
    v.resize(len, fill);
    Ok(v)
}

// ---------------------------------------------------------------------------------------------
// A minimal safe wrapper over the cfitsio calls used here.

/// The text cfitsio gives for a status code.
pub(super) fn cfitsio_text(status: c_int) -> String {
    let mut buf = [0 as c_char; 40];
    // SAFETY: ffgerr writes at most 30 characters plus a NUL into the buffer.
    unsafe { sys::ffgerr(status, buf.as_mut_ptr()) };
    // SAFETY: the buffer is NUL-terminated (zero-initialised and ffgerr writes a NUL).
    let text = unsafe { CStr::from_ptr(buf.as_ptr()) }
        .to_string_lossy()
        .into_owned();
    let line = format!("cfitsio status {status}: {}", text.trim());
    if status == MEMORY_ALLOCATION {
        format!("{line}; {}", crate::limits::out_of_memory_clause())
    } else {
        line
    }
}

fn path_to_c(path: &Path, shown: &Path) -> Result<CString> {
    #[cfg(unix)]
    let bytes = {
        use std::os::unix::ffi::OsStrExt;
        path.as_os_str().as_bytes().to_vec()
    };
    #[cfg(not(unix))]
    let bytes = path
        .to_str()
        .ok_or_else(|| Error::io(shown, "the path is not valid Unicode"))?
        .as_bytes()
        .to_vec();
    CString::new(bytes).map_err(|_| Error::io(shown, "the path contains a NUL byte"))
}

pub(super) struct FitsHandle {
    ptr: *mut sys::fitsfile,
}

impl Drop for FitsHandle {
    fn drop(&mut self) {
        if !self.ptr.is_null() {
            let mut status = 0;
            // SAFETY: `ptr` came from a successful ffdkopn/ffdkinit and is closed once.
            unsafe { sys::ffclos(self.ptr, &mut status) };
            self.ptr = std::ptr::null_mut();
        }
    }
}

impl FitsHandle {
    /// Opens an existing file read-only, without cfitsio's extended file-name syntax.
    pub(super) fn open(path: &Path) -> Result<Self> {
        let c = path_to_c(path, path)?;
        let mut ptr = std::ptr::null_mut();
        let mut status = 0;
        // SAFETY: valid NUL-terminated path, out-pointers to locals.
        unsafe { sys::ffdkopn(&mut ptr, c.as_ptr(), READONLY, &mut status) };
        let handle = FitsHandle { ptr };
        cfitsio_checked(path, "cannot be read as FITS", status)?;
        Ok(handle)
    }

    /// Creates a new file `tmp` (errors name `shown`) with an empty primary HDU.
    fn create(tmp: &Path, shown: &Path) -> Result<Self> {
        let c = path_to_c(tmp, shown)?;
        let mut ptr = std::ptr::null_mut();
        let mut status = 0;
        // SAFETY: valid NUL-terminated path, out-pointers to locals.
        unsafe { sys::ffdkinit(&mut ptr, c.as_ptr(), &mut status) };
        let handle = FitsHandle { ptr };
        if status == 0 {
            // SAFETY: open handle; NAXIS = 0 so `naxes` is not read.
            unsafe { sys::ffcrim(handle.ptr, 8, 0, std::ptr::null_mut(), &mut status) };
        }
        cfitsio_checked(shown, "cannot be created", status)?;
        Ok(handle)
    }

    /// Moves to 0-based HDU `hdu`; its type (0 image, 1 ASCII table, 2 binary table) or the status.
    pub(super) fn move_to(&mut self, hdu: usize) -> std::result::Result<c_int, c_int> {
        let mut kind = 0;
        let mut status = 0;
        let number = c_int::try_from(hdu + 1).unwrap_or(c_int::MAX);
        // SAFETY: open handle, out-pointers to locals.
        unsafe { sys::ffmahd(self.ptr, number, &mut kind, &mut status) };
        status_result(status).map(|()| kind)
    }

    /// The raw value text of keyword `name` in the current HDU, `None` when absent.
    fn key(&mut self, path: &Path, name: &str) -> Result<Option<String>> {
        let c = CString::new(name).map_err(|_| Error::fits(path, "bad keyword name"))?;
        let mut value = [0 as c_char; 128];
        let mut status = 0;
        // SAFETY: open handle; `value` holds the 71 characters (+NUL) cfitsio can write; the
        // comment pointer may be null.
        unsafe {
            sys::ffgkey(
                self.ptr,
                c.as_ptr(),
                value.as_mut_ptr(),
                std::ptr::null_mut(),
                &mut status,
            )
        };
        match status {
            0 => {
                // SAFETY: zero-initialised buffer longer than what cfitsio writes.
                let s = unsafe { CStr::from_ptr(value.as_ptr()) };
                Ok(Some(s.to_string_lossy().into_owned()))
            }
            KEY_NO_EXIST => Ok(None),
            s => Err(Error::fits(
                path,
                format!("cannot read keyword {name} ({})", cfitsio_text(s)),
            )),
        }
    }

    pub(super) fn num_cols(&mut self, path: &Path) -> Result<c_int> {
        let mut n = 0;
        let mut status = 0;
        // SAFETY: open handle, out-pointers to locals.
        unsafe { sys::ffgncl(self.ptr, &mut n, &mut status) };
        cfitsio_checked(path, "cannot count table columns", status)?;
        Ok(n)
    }

    pub(super) fn num_rows(&mut self, path: &Path) -> Result<u64> {
        let mut n: sys::LONGLONG = 0;
        let mut status = 0;
        // SAFETY: open handle, out-pointers to locals.
        unsafe { sys::ffgnrwll(self.ptr, &mut n, &mut status) };
        cfitsio_checked(path, "cannot count table rows", status)?;
        Ok(n.max(0) as u64)
    }

    /// cfitsio type code (negative for variable-length arrays) and repeat count of a column.
    pub(super) fn column_type(&mut self, path: &Path, colnum: c_int) -> Result<(c_int, u64)> {
        let mut code = 0;
        let mut repeat: sys::LONGLONG = 0;
        let mut width: sys::LONGLONG = 0;
        let mut status = 0;
        // SAFETY: open handle, out-pointers to locals.
        unsafe {
            sys::ffgtclll(
                self.ptr,
                colnum,
                &mut code,
                &mut repeat,
                &mut width,
                &mut status,
            )
        };
        cfitsio_checked(
            path,
            format_args!("cannot read the type of column {colnum}"),
            status,
        )?;
        Ok((code, repeat.max(0) as u64))
    }

    /// Byte offset of the current HDU's data.
    fn data_start(&mut self, path: &Path) -> Result<u64> {
        let (mut head, mut data, mut end): (sys::LONGLONG, sys::LONGLONG, sys::LONGLONG) =
            (0, 0, 0);
        let mut status = 0;
        // SAFETY: open handle, out-pointers to locals.
        unsafe { sys::ffghadll(self.ptr, &mut head, &mut data, &mut end, &mut status) };
        cfitsio_checked(path, "cannot locate the table data", status)?;
        Ok(data.max(0) as u64)
    }

    /// `count` values of column `colnum` from its start, as f64; TNULL values of an integer
    /// column become NaN. A float column (`float_column`) is read as stored, without cfitsio's
    /// null check, which would turn ±inf into NaN too and so hide an infinite weight or value.
    /// TSCAL/TZERO are applied by cfitsio.
    fn read_doubles(
        &mut self,
        path: &Path,
        colnum: c_int,
        count: u64,
        float_column: bool,
    ) -> Result<Vec<f64>> {
        // cfitsio skips its null check when the null value is 0
        let nulval = if float_column { 0.0 } else { f64::NAN };
        self.read_column(path, colnum, count, Some(nulval))
    }

    /// `count` values of integer column `colnum` from its start, as i64.
    fn read_longs(&mut self, path: &Path, colnum: c_int, count: u64) -> Result<Vec<i64>> {
        self.read_column(path, colnum, count, None)
    }

    /// `count` values of column `colnum` from its start, converted by cfitsio to `T`; null
    /// values become `nulval`, and with `None` cfitsio does no null check.
    fn read_column<T: ColumnValue>(
        &mut self,
        path: &Path,
        colnum: c_int,
        count: u64,
        nulval: Option<T>,
    ) -> Result<Vec<T>> {
        self.read_column_from(path, colnum, (1, 1), count, nulval)
    }

    /// [`Self::read_column`] from 1-based (row, element) `first` on.
    fn read_column_from<T: ColumnValue>(
        &mut self,
        path: &Path,
        colnum: c_int,
        first: (u64, u64),
        count: u64,
        nulval: Option<T>,
    ) -> Result<Vec<T>> {
        let mut out = allocate(path, count as usize, T::default())?;
        self.read_rows_into(path, colnum, first, &mut out, nulval)?;
        Ok(out)
    }

    /// `out.len()` values of column `colnum` from 0-based row `first_row` (one value per row),
    /// as f64; integer TNULL values become NaN, float columns are read as stored (see
    /// [`FitsHandle::read_doubles`]).
    pub(super) fn read_double_rows(
        &mut self,
        path: &Path,
        colnum: c_int,
        first_row: u64,
        out: &mut [f64],
        float_column: bool,
    ) -> Result<()> {
        let nulval = if float_column { 0.0 } else { f64::NAN };
        self.read_rows_into(path, colnum, (first_row + 1, 1), out, Some(nulval))
    }

    /// Fills `out` with the column's values from 1-based (row, element) `first` onwards
    /// (across rows for a column of several values per row).
    fn read_rows_into<T: ColumnValue>(
        &mut self,
        path: &Path,
        colnum: c_int,
        first: (u64, u64),
        out: &mut [T],
        mut nulval: Option<T>,
    ) -> Result<()> {
        let count = out.len() as u64;
        if count == 0 {
            return Ok(());
        }
        let nulval_ptr = match nulval.as_mut() {
            Some(v) => v as *mut T as *mut c_void,
            None => std::ptr::null_mut(),
        };
        let mut anynul = 0;
        let mut status = 0;
        // SAFETY: open handle; `out` holds exactly `count` values of `T`, whose cfitsio type is
        // `T::DATATYPE`; `nulval_ptr` is null (no null check) or points to one `T`.
        unsafe {
            sys::ffgcv(
                self.ptr,
                T::DATATYPE,
                colnum,
                first.0 as sys::LONGLONG,
                first.1 as sys::LONGLONG,
                count as sys::LONGLONG,
                nulval_ptr,
                out.as_mut_ptr() as *mut c_void,
                &mut anynul,
                &mut status,
            )
        };
        cfitsio_checked(path, format_args!("cannot read column {colnum}"), status)
    }

    /// Appends a binary table of `rows` rows with the given column names and TFORMs.
    fn create_table(
        &mut self,
        rows: u64,
        ttype: &[String],
        tform: &[String],
        extname: &str,
    ) -> std::result::Result<(), c_int> {
        let to_c = |v: &[String]| -> std::result::Result<Vec<CString>, c_int> {
            v.iter()
                .map(|s| CString::new(s.as_str()).map_err(|_| 0))
                .collect()
        };
        let names = to_c(ttype)?;
        let forms = to_c(tform)?;
        let ext = CString::new(extname).map_err(|_| 0)?;
        let mut name_ptrs: Vec<*mut c_char> =
            names.iter().map(|c| c.as_ptr() as *mut c_char).collect();
        let mut form_ptrs: Vec<*mut c_char> =
            forms.iter().map(|c| c.as_ptr() as *mut c_char).collect();
        let mut status = 0;
        // SAFETY: open handle; the pointer arrays hold `ttype.len()` valid C strings that outlive
        // the call (cfitsio only reads them); a null unit array means no TUNIT keywords.
        unsafe {
            sys::ffcrtb(
                self.ptr,
                BINARY_TBL,
                rows as sys::LONGLONG,
                name_ptrs.len() as c_int,
                name_ptrs.as_mut_ptr(),
                form_ptrs.as_mut_ptr(),
                std::ptr::null_mut(),
                ext.as_ptr(),
                &mut status,
            )
        };
        status_result(status)
    }

    fn write_key(
        &mut self,
        key: &str,
        value: &KeyValue,
        comment: &str,
    ) -> std::result::Result<(), c_int> {
        let k = CString::new(key).map_err(|_| 0)?;
        let c = CString::new(comment).map_err(|_| 0)?;
        let mut status = 0;
        match value {
            KeyValue::Text(t) => {
                let v = CString::new(t.as_str()).map_err(|_| 0)?;
                // SAFETY: open handle and valid C strings.
                unsafe { sys::ffpkys(self.ptr, k.as_ptr(), v.as_ptr(), c.as_ptr(), &mut status) };
            }
            KeyValue::Integer(i) => {
                // SAFETY: open handle and valid C strings.
                unsafe { sys::ffpkyj(self.ptr, k.as_ptr(), *i, c.as_ptr(), &mut status) };
            }
        }
        status_result(status)
    }

    /// Writes `values` into column `colnum` starting at 0-based element `start` of the column
    /// (row `start / repeat`, element `start % repeat`); cfitsio converts to the column's type.
    fn write_doubles(
        &mut self,
        colnum: c_int,
        repeat: u64,
        start: u64,
        values: &mut [f64],
    ) -> std::result::Result<(), c_int> {
        if values.is_empty() {
            return Ok(());
        }
        let mut status = 0;
        let repeat = repeat.max(1);
        // SAFETY: open handle; `values` holds `values.len()` f64 matching TDOUBLE.
        unsafe {
            sys::ffpcl(
                self.ptr,
                TDOUBLE,
                colnum,
                (start / repeat + 1) as sys::LONGLONG,
                (start % repeat + 1) as sys::LONGLONG,
                values.len() as sys::LONGLONG,
                values.as_mut_ptr() as *mut c_void,
                &mut status,
            )
        };
        status_result(status)
    }

    /// Writes integer `values` into column `colnum` from row 1 (one value per row).
    fn write_longs(&mut self, colnum: c_int, values: &mut [i64]) -> std::result::Result<(), c_int> {
        let mut status = 0;
        // SAFETY: open handle; `values` holds `values.len()` i64 matching TLONGLONG.
        unsafe {
            sys::ffpcl(
                self.ptr,
                TLONGLONG,
                colnum,
                1,
                1,
                values.len() as sys::LONGLONG,
                values.as_mut_ptr() as *mut c_void,
                &mut status,
            )
        };
        status_result(status)
    }

    /// Closes the file, reporting whether the final flush succeeded.
    fn close(mut self) -> std::result::Result<(), c_int> {
        let mut status = 0;
        // SAFETY: open handle, closed exactly once (the pointer is cleared so Drop skips it).
        unsafe { sys::ffclos(self.ptr, &mut status) };
        self.ptr = std::ptr::null_mut();
        status_result(status)
    }
}
