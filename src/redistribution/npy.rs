//! Minimal NPY (NumPy array file) reader and writer for 2-D little-endian f64 arrays in C
//! order. Format: NumPy Enhancement Proposal 1, "A simple file format for NumPy arrays"
//! (NEP 1, 2007): magic `\x93NUMPY`, version bytes, header length (u16 LE for 1.0, u32 LE for
//! 2.0/3.0), an ASCII Python-dict header padded with spaces to a multiple of 64 bytes and
//! ending in '\n', then the raw data.

use std::path::Path;

use super::MatrixError;
use super::dense::Matrix;

const MAGIC: &[u8] = b"\x93NUMPY";

/// Bytes of an NPY v1.0 file holding `m` as '<f8', C order, shape (rows, cols).
pub fn encode(m: &Matrix) -> Vec<u8> {
    let mut header = format!(
        "{{'descr': '<f8', 'fortran_order': False, 'shape': ({}, {}), }}",
        m.rows(),
        m.cols()
    );
    let unpadded = MAGIC.len() + 2 + 2 + header.len() + 1;
    header.push_str(&" ".repeat((64 - unpadded % 64) % 64));
    header.push('\n');
    let mut out = Vec::with_capacity(MAGIC.len() + 4 + header.len() + 8 * m.as_slice().len());
    out.extend_from_slice(MAGIC);
    out.extend_from_slice(&[1, 0]);
    out.extend_from_slice(&(header.len() as u16).to_le_bytes());
    out.extend_from_slice(header.as_bytes());
    for x in m.as_slice() {
        out.extend_from_slice(&x.to_le_bytes());
    }
    out
}

/// Parses NPY bytes into a matrix; `path` only labels errors. Accepts versions 1.0–3.0,
/// dtype '<f8' and C order, 2-D shapes (a 1-D shape (n,) is read as 1 × n).
pub fn decode(bytes: &[u8], path: &Path) -> Result<Matrix, MatrixError> {
    let bad = |problem: String, expected: &str, fix: &str| {
        MatrixError::format(path, problem, expected, fix)
    };
    let npy_fix = "write the array with numpy.save(path, array.astype('<f8'))";
    if bytes.len() < 10 || &bytes[..6] != MAGIC {
        return Err(bad(
            "not an NPY file (no \\x93NUMPY magic)".into(),
            "an NPY file",
            npy_fix,
        ));
    }
    let (header_len, start) = match bytes[6] {
        1 => (u16::from_le_bytes([bytes[8], bytes[9]]) as usize, 10),
        2 | 3 if bytes.len() >= 12 => (
            u32::from_le_bytes([bytes[8], bytes[9], bytes[10], bytes[11]]) as usize,
            12,
        ),
        v => {
            return Err(bad(
                format!("NPY format version {v}.{}", bytes[7]),
                "1.0, 2.0 or 3.0",
                npy_fix,
            ));
        }
    };
    let end = start + header_len;
    if bytes.len() < end {
        return Err(bad(
            "header runs past the end of the file".into(),
            "a complete file",
            npy_fix,
        ));
    }
    let header = std::str::from_utf8(&bytes[start..end])
        .map_err(|_| bad("header is not text".into(), "an ASCII dict header", npy_fix))?;
    let descr = dict_value(header, "descr")
        .ok_or_else(|| bad("header has no 'descr'".into(), "'descr': '<f8'", npy_fix))?;
    let descr = descr.trim_matches(|c| c == '\'' || c == '"');
    if descr != "<f8" {
        return Err(bad(
            format!("dtype '{descr}'"),
            "'<f8' (little-endian float64)",
            "convert with array.astype('<f8')",
        ));
    }
    if dict_value(header, "fortran_order").as_deref() != Some("False") {
        return Err(bad(
            "array is in Fortran order or the order is missing".into(),
            "'fortran_order': False (C order)",
            "save numpy.ascontiguousarray(array)",
        ));
    }
    let shape_txt = dict_value(header, "shape").ok_or_else(|| {
        bad(
            "header has no 'shape'".into(),
            "'shape': (rows, cols)",
            npy_fix,
        )
    })?;
    let dims: Result<Vec<usize>, _> = shape_txt
        .trim_matches(|c| c == '(' || c == ')')
        .split(',')
        .map(str::trim)
        .filter(|s| !s.is_empty())
        .map(str::parse::<usize>)
        .collect();
    let dims = dims.map_err(|_| bad(format!("shape {shape_txt}"), "integers", npy_fix))?;
    let (rows, cols) = match dims.as_slice() {
        [n] => (1, *n),
        [r, c] => (*r, *c),
        _ => {
            return Err(bad(
                format!("shape {shape_txt}"),
                "a 2-D array",
                "save a 2-D array",
            ));
        }
    };
    let data = &bytes[end..];
    let count = rows
        .checked_mul(cols)
        .filter(|c| c.checked_mul(8) == Some(data.len()));
    let Some(count) = count else {
        return Err(bad(
            format!("{} data bytes for shape ({rows}, {cols})", data.len()),
            &format!("{} bytes", rows.saturating_mul(cols).saturating_mul(8)),
            "the file is truncated or padded: write it again",
        ));
    };
    let values: Vec<f64> = data
        .chunks_exact(8)
        .take(count)
        .map(|c| f64::from_le_bytes(c.try_into().expect("8-byte chunk")))
        .collect();
    Ok(Matrix::from_row_major(rows, cols, values).expect("length checked above"))
}

/// Text of `key`'s value in a Python dict literal: up to the next top-level comma or '}'.
fn dict_value(header: &str, key: &str) -> Option<String> {
    let pos = header
        .find(&format!("'{key}'"))
        .or_else(|| header.find(&format!("\"{key}\"")))?;
    let rest = &header[pos + key.len() + 2..];
    let rest = rest.trim_start().strip_prefix(':')?.trim_start();
    let mut depth = 0i32;
    for (i, ch) in rest.char_indices() {
        match ch {
            '(' => depth += 1,
            ')' => depth -= 1,
            ',' | '}' if depth == 0 => return Some(rest[..i].trim().to_string()),
            _ => {}
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn header_is_aligned_to_64_and_round_trips() {
        let m = Matrix::from_row_major(2, 3, vec![1.0, -2.5, 3e-300, 0.0, f64::NAN, 7.0]).unwrap();
        let b = encode(&m);
        let hl = u16::from_le_bytes([b[8], b[9]]) as usize;
        assert_eq!((10 + hl) % 64, 0);
        assert_eq!(b[10 + hl - 1], b'\n');
        let back = decode(&b, Path::new("x.npy")).unwrap();
        assert_eq!(back.rows(), 2);
        assert_eq!(back.as_slice()[..4], m.as_slice()[..4]);
        assert!(back.as_slice()[4].is_nan());
    }

    #[test]
    fn numpy_written_header_is_understood() {
        // Header as numpy 1.x writes it for np.zeros((0, 4)).
        let mut b = b"\x93NUMPY\x01\x00".to_vec();
        let mut h = "{'descr': '<f8', 'fortran_order': False, 'shape': (0, 4), }".to_string();
        h.push_str(&" ".repeat(64 - (10 + h.len() + 1) % 64));
        h.push('\n');
        b.extend_from_slice(&(h.len() as u16).to_le_bytes());
        b.extend_from_slice(h.as_bytes());
        let m = decode(&b, Path::new("z.npy")).unwrap();
        assert_eq!((m.rows(), m.cols()), (0, 4));
    }

    #[test]
    fn wrong_dtype_and_truncation_are_reported() {
        let m = Matrix::identity(2);
        let good = encode(&m);
        let mut f4 = good.clone();
        let at = f4.windows(3).position(|w| w == b"<f8").unwrap();
        f4[at + 2] = b'4';
        let e = decode(&f4, Path::new("a.npy")).unwrap_err().to_string();
        assert!(e.contains("a.npy") && e.contains("<f4"), "{e}");
        let e = decode(&good[..good.len() - 3], Path::new("b.npy"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("truncated"), "{e}");
    }
}
