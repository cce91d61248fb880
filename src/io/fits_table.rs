//! Plain FITS binary tables (FITS standard 4.0, §7.3) read column by column in blocks of rows,
//! so that a table larger than memory can be streamed: the galaxy catalogues of
//! [`crate::catalogue`] are such tables.
//!
//! The table is the first binary-table HDU of the file. Only scalar numeric columns (one value
//! per row: TFORM `D`, `E`, `J`, `K`, `I`, `B`, ...) are read, as f64; cfitsio applies
//! TSCAL/TZERO, integer TNULL values become NaN, and float columns are read as stored so that an
//! infinite value stays infinite. The same checks and one-line errors as the HEALPix map reader
//! ([`crate::io::fits_io`]) apply: not FITS, gzip, truncated data, unreadable HDUs.

use super::fits_io::{
    cfitsio_text, check_data_present, check_file_start, non_numeric_reason, text_key,
    truncated_or_damaged, FitsHandle, BINARY_TBL, TDOUBLE, TFLOAT,
};
use crate::error::{Error, Result};
use fitsio::sys;
use std::os::raw::c_int;
use std::path::{Path, PathBuf};

/// One column of a binary table as its header declares it.
#[derive(Debug, Clone)]
pub struct TableColumn {
    /// `TTYPEn` (empty when absent).
    pub name: String,
    /// `TFORMn` as declared.
    pub format: String,
    /// `TUNITn`, when present.
    pub unit: Option<String>,
    /// Values per row (the TFORM repeat count).
    pub values_per_row: u64,
    colnum: c_int,
    code: c_int,
}

/// An open FITS binary table whose header has been checked; rows are read on demand.
pub struct FitsTable {
    file: FitsHandle,
    path: PathBuf,
    hdu: usize,
    rows: u64,
    columns: Vec<TableColumn>,
}

impl std::fmt::Debug for FitsTable {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("FitsTable")
            .field("path", &self.path)
            .field("hdu", &self.hdu)
            .field("rows", &self.rows)
            .field("columns", &self.columns)
            .finish()
    }
}

impl FitsTable {
    /// Opens `path` and checks the first binary table: its HDU must be readable and the file
    /// must hold all the rows the header declares.
    pub fn open(path: &Path) -> Result<Self> {
        const MAX_HDUS: usize = 1000;
        let file_len = check_file_start(path)?;
        let mut file = FitsHandle::open(path)?;
        let mut found = None;
        for hdu in 1..MAX_HDUS {
            match file.move_to(hdu) {
                Ok(BINARY_TBL) => {
                    found = Some(hdu);
                    break;
                }
                Ok(_) => continue,
                Err(status) if status == sys::END_OF_FILE as c_int => break,
                Err(status) => {
                    return Err(truncated_or_damaged(
                        path,
                        file_len,
                        format!("HDU {hdu} cannot be read, {}", cfitsio_text(status)),
                    ))
                }
            }
        }
        let Some(hdu) = found else {
            return Err(if !file_len.is_multiple_of(2880) {
                truncated_or_damaged(path, file_len, "no complete binary table".to_string())
            } else {
                Error::fits(path, "the file holds no binary table")
            });
        };
        let rows = file.num_rows(path)?;
        let ncols = file.num_cols(path)?;
        let mut columns = Vec::with_capacity(ncols.max(0) as usize);
        for colnum in 1..=ncols {
            let name = text_key(&mut file, path, &format!("TTYPE{colnum}"))?.unwrap_or_default();
            let format = text_key(&mut file, path, &format!("TFORM{colnum}"))?.unwrap_or_default();
            let unit = text_key(&mut file, path, &format!("TUNIT{colnum}"))?;
            let (code, values_per_row) = file.column_type(path, colnum)?;
            columns.push(TableColumn {
                name,
                format,
                unit,
                values_per_row,
                colnum,
                code,
            });
        }
        check_data_present(&mut file, path, hdu, rows, file_len)?;
        Ok(FitsTable {
            file,
            path: path.to_path_buf(),
            hdu,
            rows,
            columns,
        })
    }

    /// 0-based HDU number of the table.
    pub fn hdu(&self) -> usize {
        self.hdu
    }

    /// Number of rows.
    pub fn rows(&self) -> u64 {
        self.rows
    }

    /// The columns, in file order.
    pub fn columns(&self) -> &[TableColumn] {
        &self.columns
    }

    /// Position of the column named `name` (case-insensitive, surrounding blanks ignored).
    pub fn find(&self, name: &str) -> Option<usize> {
        let wanted = name.trim();
        self.columns
            .iter()
            .position(|c| c.name.trim().eq_ignore_ascii_case(wanted))
    }

    /// Checks that column `index` holds one real number per row, naming it in the error.
    pub fn check_scalar_numeric(&self, index: usize) -> Result<()> {
        let c = &self.columns[index];
        if let Some(reason) = non_numeric_reason(c.code, &c.format) {
            return Err(Error::fits(
                &self.path,
                format!("column '{}' holds {reason}", c.name.trim()),
            ));
        }
        if c.values_per_row != 1 {
            return Err(Error::fits(
                &self.path,
                format!(
                    "column '{}' holds {} values per row (TFORM '{}'); one number per row is needed",
                    c.name.trim(),
                    c.values_per_row,
                    c.format
                ),
            ));
        }
        Ok(())
    }

    /// Fills `out` with column `index` from 0-based row `first_row` on, as f64 (see the module
    /// doc); the rows must exist and the column must pass [`FitsTable::check_scalar_numeric`].
    pub fn read(&mut self, index: usize, first_row: u64, out: &mut [f64]) -> Result<()> {
        self.check_scalar_numeric(index)?;
        let end = first_row.saturating_add(out.len() as u64);
        if end > self.rows {
            return Err(Error::fits(
                &self.path,
                format!(
                    "rows {first_row}..{end} asked for, but the table has {} rows",
                    self.rows
                ),
            ));
        }
        let c = &self.columns[index];
        let float_column = c.code == TFLOAT || c.code == TDOUBLE;
        let colnum = c.colnum;
        self.file
            .read_double_rows(&self.path, colnum, first_row, out, float_column)
    }
}
