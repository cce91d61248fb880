//! Galaxy catalogue files read in blocks of rows: CSV text with a header row (RFC 4180, through
//! the `csv` crate) and FITS binary tables (through cfitsio, [`FitsTable`]). The format is told
//! from the content: a FITS file begins with the keyword `SIMPLE  =` (FITS standard 4.0, §4.4.1),
//! anything else is read as CSV.
//!
//! Columns are chosen by name, compared case-insensitively: RA and Dec in degrees (ICRS), the
//! two ellipticity components and, optionally, a weight ([`CatalogueColumns`]). A FITS column
//! whose TUNIT says radians is refused for RA or Dec. In CSV, lines starting with `#` are
//! comments and fields may be surrounded by blanks; a field that is empty or not a number reads
//! as NaN, so the row is counted as bad by [`super::screening`], never used.

use super::screening::GalaxyBlock;
use crate::error::{Error, Result};
use crate::io::fits_io::{read_file_start, FITS_SIGNATURE};
use crate::io::fits_table::FitsTable;
use std::path::{Path, PathBuf};

/// Rows per block when streaming a catalogue: 2²⁰ rows, 40 MiB of f64 columns.
pub const DEFAULT_BLOCK_ROWS: usize = 1 << 20;

/// Where the weights come from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum WeightChoice {
    /// The column [`DEFAULT_WEIGHT_COLUMN`] when the catalogue has it, unit weights otherwise.
    Default,
    /// This column, which must exist.
    Column(String),
    /// Every galaxy weighs 1, whatever the columns.
    Unit,
}

/// The default names of the catalogue columns.
pub const DEFAULT_RA_COLUMN: &str = "RA";
/// See [`DEFAULT_RA_COLUMN`].
pub const DEFAULT_DEC_COLUMN: &str = "DEC";
/// See [`DEFAULT_RA_COLUMN`].
pub const DEFAULT_E1_COLUMN: &str = "E1";
/// See [`DEFAULT_RA_COLUMN`].
pub const DEFAULT_E2_COLUMN: &str = "E2";
/// See [`DEFAULT_RA_COLUMN`].
pub const DEFAULT_WEIGHT_COLUMN: &str = "WEIGHT";

/// The names of the columns to read.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CatalogueColumns {
    /// Right ascension, degrees.
    pub ra: String,
    /// Declination, degrees.
    pub dec: String,
    /// First ellipticity component.
    pub e1: String,
    /// Second ellipticity component.
    pub e2: String,
    /// The weights.
    pub weight: WeightChoice,
}

impl Default for CatalogueColumns {
    fn default() -> Self {
        CatalogueColumns {
            ra: DEFAULT_RA_COLUMN.to_string(),
            dec: DEFAULT_DEC_COLUMN.to_string(),
            e1: DEFAULT_E1_COLUMN.to_string(),
            e2: DEFAULT_E2_COLUMN.to_string(),
            weight: WeightChoice::Default,
        }
    }
}

/// The file format of a catalogue.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum CatalogueFormat {
    /// Comma-separated text with a header row.
    Csv,
    /// A FITS binary table.
    Fits,
}

enum Reader {
    Csv {
        reader: csv::Reader<std::io::BufReader<std::fs::File>>,
        record: csv::ByteRecord,
        /// Field positions of RA, Dec, e1, e2 and the weight (if any).
        fields: [Option<usize>; 5],
    },
    Fits {
        table: FitsTable,
        /// Column positions of RA, Dec, e1, e2 and the weight (if any).
        fields: [Option<usize>; 5],
    },
}

/// An open catalogue, read block by block with [`CatalogueSource::read_block`].
pub struct CatalogueSource {
    path: PathBuf,
    format: CatalogueFormat,
    weight_column: Option<String>,
    next_row: u64,
    reader: Reader,
}

impl std::fmt::Debug for CatalogueSource {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("CatalogueSource")
            .field("path", &self.path)
            .field("format", &self.format)
            .field("weight_column", &self.weight_column)
            .field("next_row", &self.next_row)
            .finish()
    }
}

/// Finds each wanted column among `names`, or an error listing the columns there are.
fn locate(
    path: &Path,
    names: &[String],
    columns: &CatalogueColumns,
) -> Result<([Option<usize>; 5], Option<String>)> {
    let find = |wanted: &str| {
        names
            .iter()
            .position(|n| n.trim().eq_ignore_ascii_case(wanted.trim()))
    };
    let listed = || {
        if names.is_empty() {
            "none".to_string()
        } else {
            names
                .iter()
                .map(|n| format!("'{}'", n.trim()))
                .collect::<Vec<_>>()
                .join(", ")
        }
    };
    let mut fields = [None; 5];
    for (k, (role, wanted)) in [
        ("RA", &columns.ra),
        ("Dec", &columns.dec),
        ("e1", &columns.e1),
        ("e2", &columns.e2),
    ]
    .into_iter()
    .enumerate()
    {
        fields[k] = Some(find(wanted).ok_or_else(|| {
            Error::Data(format!(
                "{}: no column '{}' for {role}; the columns are {}",
                path.display(),
                wanted.trim(),
                listed()
            ))
        })?);
    }
    let weight_column = match &columns.weight {
        WeightChoice::Unit => None,
        WeightChoice::Default => find(DEFAULT_WEIGHT_COLUMN).map(|i| (i, names[i].clone())),
        WeightChoice::Column(name) => {
            Some(find(name).map(|i| (i, names[i].clone())).ok_or_else(|| {
                Error::Data(format!(
                    "{}: no weight column '{}'; the columns are {}",
                    path.display(),
                    name.trim(),
                    listed()
                ))
            })?)
        }
    };
    fields[4] = weight_column.as_ref().map(|(i, _)| *i);
    Ok((fields, weight_column.map(|(_, n)| n.trim().to_string())))
}

/// Reads one field as f64, blanks around it ignored; an empty or non-numeric field is NaN
/// (screened out later). The blanks are trimmed here rather than by the CSV reader, which would
/// copy every record to trim fields that are never read.
#[inline]
fn parse_field(bytes: &[u8]) -> f64 {
    std::str::from_utf8(bytes)
        .ok()
        .and_then(|s| s.trim().parse::<f64>().ok())
        .unwrap_or(f64::NAN)
}

impl CatalogueSource {
    /// Opens a catalogue and finds its columns (nothing is read beyond the header).
    pub fn open(path: &Path, columns: &CatalogueColumns) -> Result<Self> {
        crate::files::require_regular_input(path)?;
        let mut start = [0u8; 9];
        let got = read_file_start(path, &mut start)?;
        if got == 0 {
            return Err(Error::Data(format!(
                "{}: the catalogue file is empty",
                path.display()
            )));
        }
        if start[..got].starts_with(&[0x1f, 0x8b]) {
            return Err(Error::io(
                path,
                "is gzip-compressed; decompress it first (gunzip)",
            ));
        }
        if &start[..got] == FITS_SIGNATURE {
            Self::open_fits(path, columns)
        } else {
            Self::open_csv(path, columns)
        }
    }

    fn open_csv(path: &Path, columns: &CatalogueColumns) -> Result<Self> {
        let file = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
        let mut reader = csv::ReaderBuilder::new()
            .has_headers(true)
            .comment(Some(b'#'))
            .from_reader(std::io::BufReader::with_capacity(1 << 20, file));
        let header = reader.byte_headers().map_err(|e| csv_error(path, e))?;
        let names: Vec<String> = header
            .iter()
            .map(|h| String::from_utf8_lossy(h).into_owned())
            .collect();
        if names.iter().all(|n| n.trim().is_empty()) {
            return Err(Error::Data(format!(
                "{}: the catalogue has no header row naming its columns",
                path.display()
            )));
        }
        let (fields, weight_column) = locate(path, &names, columns)?;
        Ok(CatalogueSource {
            path: path.to_path_buf(),
            format: CatalogueFormat::Csv,
            weight_column,
            next_row: 0,
            reader: Reader::Csv {
                reader,
                record: csv::ByteRecord::new(),
                fields,
            },
        })
    }

    fn open_fits(path: &Path, columns: &CatalogueColumns) -> Result<Self> {
        let table = FitsTable::open(path)?;
        let names: Vec<String> = table.columns().iter().map(|c| c.name.clone()).collect();
        let (fields, weight_column) = locate(path, &names, columns)?;
        for (k, field) in fields.iter().enumerate() {
            let Some(i) = *field else { continue };
            table.check_scalar_numeric(i)?;
            let unit = table.columns()[i].unit.as_deref().unwrap_or("");
            let unit = unit.trim().to_ascii_lowercase();
            if k < 2 && matches!(unit.as_str(), "rad" | "radian" | "radians") {
                return Err(Error::Data(format!(
                    "{}: column '{}' is in radians (TUNIT '{unit}'); RA and Dec must be in degrees",
                    path.display(),
                    names[i].trim()
                )));
            }
        }
        Ok(CatalogueSource {
            path: path.to_path_buf(),
            format: CatalogueFormat::Fits,
            weight_column,
            next_row: 0,
            reader: Reader::Fits { table, fields },
        })
    }

    /// The file read.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// CSV or FITS.
    pub fn format(&self) -> CatalogueFormat {
        self.format
    }

    /// The weight column read, `None` for unit weights.
    pub fn weight_column(&self) -> Option<&str> {
        self.weight_column.as_deref()
    }

    /// The number of rows when the format states it up front (FITS), `None` for CSV.
    pub fn declared_rows(&self) -> Option<u64> {
        match &self.reader {
            Reader::Fits { table, .. } => Some(table.rows()),
            Reader::Csv { .. } => None,
        }
    }

    /// Reads the next `max_rows` rows (fewer at the end) into `block`, replacing its contents;
    /// `false` once the catalogue is exhausted (then `block` is empty).
    pub fn read_block(&mut self, block: &mut GalaxyBlock, max_rows: usize) -> Result<bool> {
        let max_rows = max_rows.max(1);
        block.clear(self.next_row);
        match &mut self.reader {
            Reader::Csv {
                reader,
                record,
                fields,
            } => {
                let [ra, dec, e1, e2, w] = *fields;
                let (ra, dec, e1, e2) = (
                    ra.unwrap_or(0),
                    dec.unwrap_or(0),
                    e1.unwrap_or(0),
                    e2.unwrap_or(0),
                );
                while block.len() < max_rows {
                    if !reader
                        .read_byte_record(record)
                        .map_err(|e| csv_error(&self.path, e))?
                    {
                        break;
                    }
                    let field = |i: usize| record.get(i).map_or(f64::NAN, parse_field);
                    let weight = w.map_or(1.0, field);
                    block.push(field(ra), field(dec), field(e1), field(e2), weight);
                }
            }
            Reader::Fits { table, fields } => {
                let left = table.rows() - self.next_row;
                let n = left.min(max_rows as u64) as usize;
                let columns = [
                    &mut block.ra,
                    &mut block.dec,
                    &mut block.e1,
                    &mut block.e2,
                    &mut block.weight,
                ];
                for (column, field) in columns.into_iter().zip(fields.iter()) {
                    column.resize(n, 1.0);
                    if let Some(i) = *field {
                        table.read(i, self.next_row, column)?;
                    }
                }
            }
        }
        self.next_row += block.len() as u64;
        Ok(!block.is_empty())
    }
}

/// A CSV failure as one line naming the file.
fn csv_error(path: &Path, e: csv::Error) -> Error {
    let text = e.to_string().replace('\n', " ");
    Error::Data(format!("{}: {text}", path.display()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn blanks_around_column_names_and_fields_are_ignored() {
        let dir = tempfile::tempdir().unwrap();
        let (plain, padded) = (dir.path().join("plain.csv"), dir.path().join("padded.csv"));
        std::fs::write(
            &plain,
            "RA,DEC,E1,E2,WEIGHT\n10.5,-30,0.1,-0.2,2\n# note\n11,,0.3,0.4,1\n",
        )
        .unwrap();
        std::fs::write(
            &padded,
            " RA ,\tDec, E1 ,E2 , weight\n 10.5 ,\t-30 , 0.1,-0.2 ,2 \n# note\n11, ,0.3 , 0.4,1\n",
        )
        .unwrap();
        let read = |path: &Path, weight_name: &str| {
            let mut source = CatalogueSource::open(path, &CatalogueColumns::default()).unwrap();
            assert_eq!(source.weight_column(), Some(weight_name));
            let mut block = GalaxyBlock::default();
            assert!(source.read_block(&mut block, 100).unwrap());
            block
        };
        let (a, b) = (read(&plain, "WEIGHT"), read(&padded, "weight"));
        assert_eq!(a.len(), 2);
        assert_eq!(a.ra, b.ra);
        assert_eq!(a.e1, b.e1);
        assert_eq!(a.weight, b.weight);
        assert_eq!(b.dec[0], -30.0);
        assert!(
            a.dec[1].is_nan() && b.dec[1].is_nan(),
            "an empty field reads as NaN"
        );
    }
}
