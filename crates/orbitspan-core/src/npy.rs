//! NumPy `.npy` arrays of little-endian `f64`, written and read.
//!
//! Layout, following the NumPy format specification ("A Simple File Format
//! for NumPy Arrays", `numpy.lib.format`, format version 1.0):
//!
//! 1. the magic string `\x93NUMPY` (6 bytes);
//! 2. the format version, major then minor byte: `1 0`;
//! 3. the header length `HEADER_LEN` as a little-endian `u16`;
//! 4. the header: an ASCII Python dict literal
//!    `{'descr': '<f8', 'fortran_order': False, 'shape': (2, 3), }`, padded
//!    with spaces and ended by `\n` so that the data starts at a multiple of
//!    64 bytes (`10 + HEADER_LEN ≡ 0 mod 64`);
//! 5. the values as little-endian IEEE 754 doubles in C (row-major) order.
//!
//! A header too long for a `u16` length (thousands of dimensions) is written
//! as version 2.0, which differs only in a `u32` length. The reader accepts
//! versions 1.0, 2.0 and 3.0 and only the data type `'<f8'` in C order.

use crate::error::{Error, Result};

const MAGIC: &[u8; 6] = b"\x93NUMPY";
/// The data start is padded to a multiple of this many bytes.
const ALIGN: usize = 64;

/// Encodes `data` with the given `shape` as a `.npy` file (version 1.0,
/// dtype `'<f8'`, C order; see the module doc for the byte layout). A 1-D
/// shape is written `(5,)`, a 0-D shape `()`.
///
/// # Panics
/// If `data.len()` is not the product of `shape`: a bug in the caller.
pub fn encode_f64(shape: &[usize], data: &[f64]) -> Vec<u8> {
    let count: usize = shape.iter().product();
    assert_eq!(count, data.len(), "npy::encode_f64: shape {shape:?} does not hold {} values", data.len());
    let dict = format!("{{'descr': '<f8', 'fortran_order': False, 'shape': {}, }}", shape_literal(shape));
    // Prefix is magic + version + length field: 10 bytes (u16), 12 (u32).
    let (prefix, long) = if padded_len(10, dict.len()) <= usize::from(u16::MAX) { (10, false) } else { (12, true) };
    let header_len = padded_len(prefix, dict.len());
    let mut out = Vec::with_capacity(prefix + header_len + 8 * data.len());
    out.extend_from_slice(MAGIC);
    if long {
        out.extend_from_slice(&[2, 0]);
        out.extend_from_slice(&(header_len as u32).to_le_bytes());
    } else {
        out.extend_from_slice(&[1, 0]);
        out.extend_from_slice(&(header_len as u16).to_le_bytes());
    }
    out.extend_from_slice(dict.as_bytes());
    out.resize(prefix + header_len - 1, b' ');
    out.push(b'\n');
    for v in data {
        out.extend_from_slice(&v.to_le_bytes());
    }
    out
}

/// Header length (dict, spaces and the final newline) that makes
/// `prefix + length` a multiple of [`ALIGN`].
fn padded_len(prefix: usize, dict_len: usize) -> usize {
    (prefix + dict_len + 1).div_ceil(ALIGN) * ALIGN - prefix
}

/// A shape as a Python tuple literal: `()`, `(5,)`, `(2, 3)`.
fn shape_literal(shape: &[usize]) -> String {
    match shape {
        [] => "()".to_string(),
        [n] => format!("({n},)"),
        _ => format!("({})", shape.iter().map(usize::to_string).collect::<Vec<_>>().join(", ")),
    }
}

/// Decodes a `.npy` file of little-endian `f64` in C order into its shape
/// and values (row-major). Errors name `name` and say what is wrong: the
/// magic string, the version, the header, the data type, Fortran order, or
/// a data length that does not match the shape.
pub fn decode_f64(name: &str, bytes: &[u8]) -> Result<(Vec<usize>, Vec<f64>)> {
    let fail = |problem: String| Error::file(name, problem);
    if bytes.len() < 10 || !bytes.starts_with(MAGIC) {
        return Err(fail(format!(
            "not a NumPy .npy file: it does not start with the magic string \\x93NUMPY ({} bytes)",
            bytes.len()
        )));
    }
    let (major, minor) = (bytes[6], bytes[7]);
    let (prefix, header_len) = match major {
        1 => (10, usize::from(u16::from_le_bytes([bytes[8], bytes[9]]))),
        2 | 3 if bytes.len() >= 12 => (12, u32::from_le_bytes([bytes[8], bytes[9], bytes[10], bytes[11]]) as usize),
        2 | 3 => return Err(fail(format!("file ends inside the .npy preamble ({} bytes)", bytes.len()))),
        _ => {
            return Err(fail(format!(
                ".npy format version {major}.{minor} is not supported (expected 1.0, 2.0 or 3.0)"
            )))
        }
    };
    let data_start = prefix + header_len;
    if bytes.len() < data_start {
        return Err(fail(format!(
            ".npy header says it is {header_len} bytes long but the file ends after {} bytes",
            bytes.len()
        )));
    }
    let header = std::str::from_utf8(&bytes[prefix..data_start])
        .map_err(|_| fail(".npy header is not text".to_string()))?;
    let parsed = parse_header(header).map_err(|p| fail(format!(".npy header {}: {p}", header.trim_end())))?;
    if parsed.descr != "<f8" {
        return Err(fail(format!(
            "data type '{}' is not supported; save the array as little-endian float64 ('<f8')",
            parsed.descr
        )));
    }
    if parsed.fortran_order {
        return Err(fail(
            "array is stored in Fortran (column-major) order; save it in C order \
             (e.g. numpy.ascontiguousarray)"
                .to_string(),
        ));
    }
    let count = parsed
        .shape
        .iter()
        .try_fold(1usize, |acc, &n| acc.checked_mul(n))
        .filter(|c| c.checked_mul(8).is_some())
        .ok_or_else(|| fail(format!("shape {} is too large", shape_literal(&parsed.shape))))?;
    let data = &bytes[data_start..];
    if data.len() != count * 8 {
        return Err(fail(format!(
            "data is {} bytes but shape {} needs {} bytes (8 per value)",
            data.len(),
            shape_literal(&parsed.shape),
            count * 8
        )));
    }
    let values = data
        .chunks_exact(8)
        .map(|c| f64::from_le_bytes([c[0], c[1], c[2], c[3], c[4], c[5], c[6], c[7]]))
        .collect();
    Ok((parsed.shape, values))
}

/// The three fields of a `.npy` header dict.
struct Header {
    descr: String,
    fortran_order: bool,
    shape: Vec<usize>,
}

/// One value of the header dict.
enum Value {
    Text(String),
    Bool(bool),
    Tuple(Vec<usize>),
}

/// Parses the Python dict literal of a `.npy` header: exactly the keys
/// `descr` (a string), `fortran_order` (True/False) and `shape` (a tuple of
/// non-negative integers), in any order, with optional trailing commas.
fn parse_header(text: &str) -> std::result::Result<Header, String> {
    let mut p = Cursor { text: text.trim_end().as_bytes(), pos: 0 };
    p.expect(b'{')?;
    let (mut descr, mut fortran_order, mut shape) = (None, None, None);
    loop {
        p.skip_space();
        if p.eat(b'}') {
            break;
        }
        let key = p.string()?;
        p.expect(b':')?;
        let value = p.value()?;
        match (key.as_str(), value) {
            ("descr", Value::Text(t)) if descr.is_none() => descr = Some(t),
            ("fortran_order", Value::Bool(b)) if fortran_order.is_none() => fortran_order = Some(b),
            ("shape", Value::Tuple(s)) if shape.is_none() => shape = Some(s),
            (k, _) => return Err(format!("unexpected, repeated or mistyped key '{k}'")),
        }
        p.skip_space();
        if !p.eat(b',') {
            p.expect(b'}')?;
            break;
        }
    }
    p.skip_space();
    if p.pos != p.text.len() {
        return Err(format!("unexpected text after the dict at byte {}", p.pos));
    }
    Ok(Header {
        descr: descr.ok_or("missing key 'descr'")?,
        fortran_order: fortran_order.ok_or("missing key 'fortran_order'")?,
        shape: shape.ok_or("missing key 'shape'")?,
    })
}

/// A position in the header text.
struct Cursor<'a> {
    text: &'a [u8],
    pos: usize,
}

impl Cursor<'_> {
    fn skip_space(&mut self) {
        while self.pos < self.text.len() && self.text[self.pos].is_ascii_whitespace() {
            self.pos += 1;
        }
    }

    fn eat(&mut self, c: u8) -> bool {
        self.skip_space();
        if self.text.get(self.pos) == Some(&c) {
            self.pos += 1;
            true
        } else {
            false
        }
    }

    fn expect(&mut self, c: u8) -> std::result::Result<(), String> {
        if self.eat(c) {
            Ok(())
        } else {
            Err(format!("expected '{}' at byte {}", c as char, self.pos))
        }
    }

    /// A quoted string, `'…'` or `"…"`, without escapes.
    fn string(&mut self) -> std::result::Result<String, String> {
        self.skip_space();
        let quote = match self.text.get(self.pos) {
            Some(&q @ (b'\'' | b'"')) => q,
            _ => return Err(format!("expected a quoted string at byte {}", self.pos)),
        };
        let start = self.pos + 1;
        let len = self.text[start..]
            .iter()
            .position(|&c| c == quote)
            .ok_or_else(|| format!("unterminated string at byte {}", self.pos))?;
        self.pos = start + len + 1;
        Ok(String::from_utf8_lossy(&self.text[start..start + len]).into_owned())
    }

    fn value(&mut self) -> std::result::Result<Value, String> {
        self.skip_space();
        let rest = &self.text[self.pos..];
        if rest.starts_with(b"True") {
            self.pos += 4;
            Ok(Value::Bool(true))
        } else if rest.starts_with(b"False") {
            self.pos += 5;
            Ok(Value::Bool(false))
        } else if rest.starts_with(b"(") {
            self.tuple().map(Value::Tuple)
        } else {
            self.string().map(Value::Text)
        }
    }

    /// `()`, `(5,)`, `(2, 3)`, `(2, 3,)` of non-negative integers.
    fn tuple(&mut self) -> std::result::Result<Vec<usize>, String> {
        self.expect(b'(')?;
        let mut out = Vec::new();
        loop {
            if self.eat(b')') {
                return Ok(out);
            }
            self.skip_space();
            let start = self.pos;
            while self.pos < self.text.len() && self.text[self.pos].is_ascii_digit() {
                self.pos += 1;
            }
            let digits = std::str::from_utf8(&self.text[start..self.pos]).unwrap_or("");
            let n = digits
                .parse::<usize>()
                .map_err(|_| format!("expected a non-negative integer in the shape at byte {start}"))?;
            out.push(n);
            if !self.eat(b',') {
                self.expect(b')')?;
                return Ok(out);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `numpy.save` of `np.array([[0.5, -1.25, 3.0], [1e-300, 2.0**60, -0.0]])`,
    /// written by NumPy 2.4.6 (run for this test; 176 bytes).
    fn numpy_2x3() -> Vec<u8> {
        let mut bytes = b"\x93NUMPY\x01\x00v\x00{'descr': '<f8', 'fortran_order': False, 'shape': (2, 3), }".to_vec();
        bytes.resize(127, b' ');
        bytes.push(b'\n');
        let data = "000000000000e03f000000000000f4bf000000000000084059f3f8c21f6ea501000000000000b0430000000000000080";
        bytes.extend((0..data.len()).step_by(2).map(|i| u8::from_str_radix(&data[i..i + 2], 16).unwrap()));
        bytes
    }

    const VALUES_2X3: [f64; 6] = [0.5, -1.25, 3.0, 1e-300, 1152921504606846976.0, -0.0];

    #[test]
    fn header_bytes_follow_the_format_spec() {
        let bytes = encode_f64(&[2, 3], &[0.0; 6]);
        assert_eq!(&bytes[..6], b"\x93NUMPY");
        assert_eq!(&bytes[6..8], &[1, 0]);
        let header_len = u16::from_le_bytes([bytes[8], bytes[9]]) as usize;
        assert_eq!(header_len, 118); // 10 + 118 = 128, the first multiple of 64 that fits
        let dict = b"{'descr': '<f8', 'fortran_order': False, 'shape': (2, 3), }";
        assert_eq!(&bytes[10..10 + dict.len()], dict);
        assert!(bytes[10 + dict.len()..127].iter().all(|&b| b == b' '));
        assert_eq!(bytes[127], b'\n');
        assert_eq!(bytes.len(), 128 + 6 * 8);
    }

    #[test]
    fn encoding_matches_numpy_save_byte_for_byte() {
        assert_eq!(encode_f64(&[2, 3], &VALUES_2X3), numpy_2x3());
    }

    #[test]
    fn numpy_file_decodes() {
        let (shape, values) = decode_f64("ref.npy", &numpy_2x3()).unwrap();
        assert_eq!(shape, vec![2, 3]);
        assert_eq!(values.len(), 6);
        for (got, want) in values.iter().zip(VALUES_2X3) {
            assert_eq!(got.to_bits(), want.to_bits());
        }
    }

    #[test]
    fn one_dimensional_shape_has_a_trailing_comma() {
        let data = [0.0, 0.25, 0.5, 0.75, 1.0];
        let bytes = encode_f64(&[5], &data);
        // As numpy.save writes it for np.arange(5) / 4 (NumPy 2.4.6).
        let dict = b"{'descr': '<f8', 'fortran_order': False, 'shape': (5,), }";
        assert_eq!(&bytes[10..10 + dict.len()], dict);
        assert_eq!(bytes.len(), 128 + 40);
        assert_eq!(decode_f64("ramp.npy", &bytes).unwrap(), (vec![5], data.to_vec()));
    }

    #[test]
    fn round_trip_keeps_shape_and_bits() {
        let data: Vec<f64> = (0..24).map(|i| (i as f64 * 0.7).sin() * 1e3 - f64::from(i)).collect();
        let bytes = encode_f64(&[2, 3, 4], &data);
        assert_eq!((bytes.len() - data.len() * 8) % 64, 0);
        let (shape, back) = decode_f64("cube.npy", &bytes).unwrap();
        assert_eq!(shape, vec![2, 3, 4]);
        assert_eq!(back, data);
        let (shape, back) = decode_f64("scalar.npy", &encode_f64(&[], &[2.5])).unwrap();
        assert_eq!((shape, back), (vec![], vec![2.5]));
    }

    #[test]
    fn long_header_switches_to_version_2() {
        let shape = vec![1usize; 30_000];
        let bytes = encode_f64(&shape, &[7.0]);
        assert_eq!(&bytes[6..8], &[2, 0]);
        let header_len = u32::from_le_bytes([bytes[8], bytes[9], bytes[10], bytes[11]]) as usize;
        assert_eq!((12 + header_len) % 64, 0);
        assert_eq!(decode_f64("long.npy", &bytes).unwrap(), (shape, vec![7.0]));
    }

    fn error_of(bytes: &[u8]) -> String {
        decode_f64("bad.npy", bytes).unwrap_err().to_string()
    }

    #[test]
    fn corrupt_files_get_plain_errors() {
        let good = numpy_2x3();
        assert_eq!(
            error_of(b"PK\x03\x04 zip"),
            "bad.npy: not a NumPy .npy file: it does not start with the magic string \\x93NUMPY (8 bytes)"
        );
        let mut v9 = good.clone();
        v9[6] = 9;
        assert_eq!(error_of(&v9), "bad.npy: .npy format version 9.0 is not supported (expected 1.0, 2.0 or 3.0)");
        assert_eq!(
            error_of(&good[..60]),
            "bad.npy: .npy header says it is 118 bytes long but the file ends after 60 bytes"
        );
        assert_eq!(
            error_of(&good[..good.len() - 8]),
            "bad.npy: data is 40 bytes but shape (2, 3) needs 48 bytes (8 per value)"
        );
        let mut f4 = good.clone();
        let at = f4.windows(3).position(|w| w == b"<f8").unwrap();
        f4[at + 2] = b'4';
        assert_eq!(
            error_of(&f4),
            "bad.npy: data type '<f4' is not supported; save the array as little-endian float64 ('<f8')"
        );
        let fortran = encode_with_dict("{'descr': '<f8', 'fortran_order': True, 'shape': (2, 3), }", 6);
        assert!(error_of(&fortran).contains("Fortran (column-major) order"), "{}", error_of(&fortran));
        let missing = encode_with_dict("{'descr': '<f8', 'shape': (2, 3), }", 6);
        assert!(error_of(&missing).ends_with(": missing key 'fortran_order'"), "{}", error_of(&missing));
        let negative = encode_with_dict("{'descr': '<f8', 'fortran_order': False, 'shape': (2, -3), }", 6);
        assert!(error_of(&negative).contains("expected a non-negative integer in the shape"));
    }

    #[test]
    fn key_order_and_quotes_are_free() {
        let bytes = encode_with_dict("{\"shape\": (3,), \"fortran_order\": False, \"descr\": \"<f8\"}", 3);
        assert_eq!(decode_f64("keys.npy", &bytes).unwrap(), (vec![3], vec![0.0, 1.0, 2.0]));
    }

    /// A version 1.0 file with a hand-written header dict and values 0, 1, ….
    fn encode_with_dict(dict: &str, count: usize) -> Vec<u8> {
        let header_len = padded_len(10, dict.len());
        let mut out = b"\x93NUMPY\x01\x00".to_vec();
        out.extend_from_slice(&(header_len as u16).to_le_bytes());
        out.extend_from_slice(dict.as_bytes());
        out.resize(10 + header_len - 1, b' ');
        out.push(b'\n');
        for i in 0..count {
            out.extend_from_slice(&(i as f64).to_le_bytes());
        }
        out
    }
}
