//! Flat fields and masks given to `measure` as .npy files: detection, reading (2-D float64 or
//! float32, square, a tile size the engine accepts) and the checks on them, each a one-line
//! error.

use crate::error::{Error, Result};
use ndarray::Array2;
use std::io::Read;
use std::path::Path;

/// The first bytes of every .npy file (the NumPy format's magic string).
const NPY_MAGIC: &[u8; 6] = b"\x93NUMPY";

/// Is `path` a flat field: a .npy name, or a file that starts with the .npy magic string?
/// (HEALPix maps are FITS files; anything else is left to the FITS reader to refuse.)
pub fn is_flat_field(path: &Path) -> Result<bool> {
    let npy_name = path
        .extension()
        .is_some_and(|e| e.to_string_lossy().eq_ignore_ascii_case("npy"));
    if npy_name {
        return Ok(true);
    }
    let mut head = [0u8; 6];
    let magic = std::fs::File::open(path)
        .and_then(|mut f| f.read_exact(&mut head))
        .is_ok()
        && &head == NPY_MAGIC;
    Ok(magic)
}

/// A square array read from a .npy file, row-major (index row·n + column).
pub struct SquareArray {
    pub size: usize,
    pub values: Vec<f64>,
}

/// Reads a 2-D float64 or float32 .npy array (float32 widened exactly to f64).
fn read_array(path: &Path, what: &str) -> Result<Array2<f64>> {
    crate::files::require_regular_input(path)?;
    match ndarray_npy::read_npy::<_, Array2<f64>>(path) {
        Ok(a) => Ok(a),
        Err(e64) => match ndarray_npy::read_npy::<_, Array2<f32>>(path) {
            Ok(a) => Ok(a.mapv(f64::from)),
            Err(_) => Err(Error::io(
                path,
                format!("{what} must be a 2-D float64 or float32 .npy array ({e64})"),
            )),
        },
    }
}

/// Reads a flat field: square, n a size the engine accepts ([`crate::limits::is_tile_size`]),
/// at most [`crate::tiles::tiling::MAX_TILE_PIXELS`].
pub fn read_field(path: &Path) -> Result<SquareArray> {
    let array = read_array(path, "a flat field")?;
    let (rows, cols) = array.dim();
    crate::measure::flat::check_field_shape(rows, cols).map_err(|e| Error::io(path, e))?;
    Ok(SquareArray {
        size: rows,
        values: array.iter().copied().collect(),
    })
}

/// Reads a flat mask of the field's shape n × n with finite values in [0, 1], not all 0.
pub fn read_mask(path: &Path, n: usize) -> Result<Vec<f64>> {
    let array = read_array(path, "a flat mask")?;
    let (rows, cols) = array.dim();
    if (rows, cols) != (n, n) {
        return Err(Error::Mismatch(format!(
            "{}: the mask is {rows} × {cols} but the field is {n} × {n}",
            path.display()
        )));
    }
    let values: Vec<f64> = array.iter().copied().collect();
    crate::measure::flat::check_mask(&path.display().to_string(), &values, n)?;
    Ok(values)
}

/// The field's values with non-finite values allowed only where the mask is 0
/// ([`crate::measure::flat::field_values`], messages naming `path`).
pub fn field_values(path: &Path, values: Vec<f64>, mask: Option<&[f64]>) -> Result<Vec<f64>> {
    crate::measure::flat::field_values(&path.display().to_string(), values, mask)
}
