//! Element types: what a Rust value is in the file, and conversions between
//! stored and requested numeric types (as the HDF5 library converts them).

use std::fmt;

/// Errors of the pure-Rust path: one message naming what failed.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Error(String);

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for Error {}

impl From<&str> for Error {
    fn from(s: &str) -> Self {
        Error(s.to_owned())
    }
}

impl From<String> for Error {
    fn from(s: String) -> Self {
        Error(s)
    }
}

impl From<std::io::Error> for Error {
    fn from(e: std::io::Error) -> Self {
        Error(e.to_string())
    }
}

impl From<hdf5_reader::error::Error> for Error {
    fn from(e: hdf5_reader::error::Error) -> Self {
        Error(e.to_string())
    }
}

/// Result of the pure-Rust path.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Width of an integer type in bytes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IntSize {
    /// 1 byte.
    U1,
    /// 2 bytes.
    U2,
    /// 4 bytes.
    U4,
    /// 8 bytes.
    U8,
}

impl IntSize {
    fn from_bytes(n: usize) -> Option<Self> {
        Some(match n {
            1 => IntSize::U1,
            2 => IntSize::U2,
            4 => IntSize::U4,
            8 => IntSize::U8,
            _ => return None,
        })
    }

    fn bytes(self) -> usize {
        match self {
            IntSize::U1 => 1,
            IntSize::U2 => 2,
            IntSize::U4 => 4,
            IntSize::U8 => 8,
        }
    }
}

/// Width of a floating-point type.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FloatSize {
    /// f32.
    U4,
    /// f64.
    U8,
}

/// What an element is in the file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum TypeDescriptor {
    /// Signed integer.
    Integer(IntSize),
    /// Unsigned integer.
    Unsigned(IntSize),
    /// IEEE float.
    Float(FloatSize),
    /// Fixed-length ASCII string of this many bytes.
    FixedAscii(usize),
    /// Fixed-length UTF-8 string of this many bytes.
    FixedUnicode(usize),
    /// Variable-length ASCII string.
    VarLenAscii,
    /// Variable-length UTF-8 string.
    VarLenUnicode,
    /// Anything else (compound, enum, reference, ...), by name.
    Other(String),
}

impl fmt::Display for TypeDescriptor {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            TypeDescriptor::Integer(s) => write!(f, "int{}", 8 * s.bytes()),
            TypeDescriptor::Unsigned(s) => write!(f, "uint{}", 8 * s.bytes()),
            TypeDescriptor::Float(FloatSize::U4) => f.write_str("float32"),
            TypeDescriptor::Float(FloatSize::U8) => f.write_str("float64"),
            TypeDescriptor::FixedAscii(n) => write!(f, "string (ASCII, {n} bytes)"),
            TypeDescriptor::FixedUnicode(n) => write!(f, "string (UTF-8, {n} bytes)"),
            TypeDescriptor::VarLenAscii => f.write_str("string (ASCII, variable length)"),
            TypeDescriptor::VarLenUnicode => f.write_str("string (UTF-8, variable length)"),
            TypeDescriptor::Other(s) => f.write_str(s),
        }
    }
}

impl TypeDescriptor {
    /// Bytes per element (variable-length strings count as their 16-byte
    /// heap reference, as HDF5 stores them).
    pub fn size(&self) -> usize {
        match self {
            TypeDescriptor::Integer(s) | TypeDescriptor::Unsigned(s) => s.bytes(),
            TypeDescriptor::Float(FloatSize::U4) => 4,
            TypeDescriptor::Float(FloatSize::U8) => 8,
            TypeDescriptor::FixedAscii(n) | TypeDescriptor::FixedUnicode(n) => *n,
            TypeDescriptor::VarLenAscii | TypeDescriptor::VarLenUnicode => 16,
            TypeDescriptor::Other(_) => 0,
        }
    }

    pub(crate) fn from_reader(dt: &hdf5_reader::Datatype) -> Self {
        use hdf5_reader::Datatype as D;
        use hdf5_reader::{StringEncoding, StringSize};
        match dt {
            D::FixedPoint { size, signed, .. } => match IntSize::from_bytes(*size as usize) {
                Some(s) if *signed => TypeDescriptor::Integer(s),
                Some(s) => TypeDescriptor::Unsigned(s),
                None => TypeDescriptor::Other(format!("{size}-byte integer")),
            },
            D::FloatingPoint { size: 4, .. } => TypeDescriptor::Float(FloatSize::U4),
            D::FloatingPoint { size: 8, .. } => TypeDescriptor::Float(FloatSize::U8),
            D::FloatingPoint { size, .. } => TypeDescriptor::Other(format!("{size}-byte float")),
            D::String { size, encoding, .. } => {
                let utf8 = matches!(encoding, StringEncoding::Utf8);
                match (size, utf8) {
                    (StringSize::Fixed(n), false) => TypeDescriptor::FixedAscii(*n as usize),
                    (StringSize::Fixed(n), true) => TypeDescriptor::FixedUnicode(*n as usize),
                    (StringSize::Variable, false) => TypeDescriptor::VarLenAscii,
                    (StringSize::Variable, true) => TypeDescriptor::VarLenUnicode,
                }
            }
            D::VarLen { encoding, .. } if is_vlen_string(dt) => {
                if matches!(encoding, StringEncoding::Utf8) {
                    TypeDescriptor::VarLenUnicode
                } else {
                    TypeDescriptor::VarLenAscii
                }
            }
            other => TypeDescriptor::Other(format!("{other:?}")),
        }
    }
}

fn is_vlen_string(dt: &hdf5_reader::Datatype) -> bool {
    matches!(
        dt,
        hdf5_reader::Datatype::VarLen {
            kind: hdf5_reader::VarLenKind::String,
            ..
        }
    )
}

/// A number as stored, before conversion to the requested type.
#[derive(Debug, Clone, Copy)]
pub enum Number {
    /// An integer.
    Int(i128),
    /// A float.
    Float(f64),
}

/// A Rust type that can be an HDF5 element.
pub trait H5Type: Sized + Clone + 'static {
    /// The stored type this Rust type writes.
    fn type_descriptor() -> TypeDescriptor;
    /// The number it holds, for numeric types.
    fn to_number(&self) -> Option<Number> {
        None
    }
    /// Converts a stored number (None for strings).
    fn from_number(_n: Number) -> Option<Self> {
        None
    }
    /// The text it holds, for string types.
    fn to_text(&self) -> Option<&str> {
        None
    }
    /// Builds from text read from a string element.
    fn from_text(_s: &str) -> Option<Self> {
        None
    }
}

macro_rules! int_type {
    ($t:ty, $variant:ident, $size:ident) => {
        impl H5Type for $t {
            fn type_descriptor() -> TypeDescriptor {
                TypeDescriptor::$variant(IntSize::$size)
            }
            fn to_number(&self) -> Option<Number> {
                Some(Number::Int(*self as i128))
            }
            fn from_number(n: Number) -> Option<Self> {
                match n {
                    Number::Int(i) => <$t>::try_from(i).ok(),
                    Number::Float(x) if x.is_finite() => Some(x as $t),
                    Number::Float(_) => None,
                }
            }
        }
    };
}

int_type!(i8, Integer, U1);
int_type!(i16, Integer, U2);
int_type!(i32, Integer, U4);
int_type!(i64, Integer, U8);
int_type!(u8, Unsigned, U1);
int_type!(u16, Unsigned, U2);
int_type!(u32, Unsigned, U4);
int_type!(u64, Unsigned, U8);

macro_rules! float_type {
    ($t:ty, $size:ident) => {
        impl H5Type for $t {
            fn type_descriptor() -> TypeDescriptor {
                TypeDescriptor::Float(FloatSize::$size)
            }
            fn to_number(&self) -> Option<Number> {
                Some(Number::Float(*self as f64))
            }
            fn from_number(n: Number) -> Option<Self> {
                Some(match n {
                    Number::Int(i) => i as $t,
                    Number::Float(x) => x as $t,
                })
            }
        }
    };
}

float_type!(f32, U4);
float_type!(f64, U8);

/// Error of building a fixed-length string from text that does not fit.
#[derive(Debug, Clone)]
pub struct StringError(String);

impl fmt::Display for StringError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for StringError {}

macro_rules! fixed_string {
    ($name:ident, $variant:ident, $doc:literal) => {
        #[doc = $doc]
        #[derive(Debug, Clone, Default, PartialEq, Eq)]
        pub struct $name<const N: usize>(String);

        impl<const N: usize> $name<N> {
            /// Builds from bytes of at most `N` bytes.
            ///
            /// # Errors
            /// Longer input, or bytes that are not text of this kind.
            pub fn from_ascii<B: AsRef<[u8]> + ?Sized>(b: &B) -> Result<Self, StringError> {
                let b = b.as_ref();
                if b.len() > N {
                    return Err(StringError(format!(
                        "string of {} bytes exceeds the capacity {N}",
                        b.len()
                    )));
                }
                let s = std::str::from_utf8(b).map_err(|_| StringError("not text".into()))?;
                if stringify!($variant) == "FixedAscii" && !s.is_ascii() {
                    return Err(StringError("not ASCII".into()));
                }
                Ok(Self(s.to_owned()))
            }

            /// The text.
            pub fn as_str(&self) -> &str {
                &self.0
            }
        }

        impl<const N: usize> H5Type for $name<N> {
            fn type_descriptor() -> TypeDescriptor {
                TypeDescriptor::$variant(N)
            }
            fn to_text(&self) -> Option<&str> {
                Some(&self.0)
            }
            fn from_text(s: &str) -> Option<Self> {
                let mut end = s.len().min(N);
                while !s.is_char_boundary(end) {
                    end -= 1;
                }
                Some(Self(s[..end].to_owned()))
            }
        }
    };
}

fixed_string!(
    FixedAscii,
    FixedAscii,
    "A fixed-length ASCII string of at most `N` bytes."
);
fixed_string!(
    FixedUnicode,
    FixedUnicode,
    "A fixed-length UTF-8 string of at most `N` bytes."
);

macro_rules! varlen_string {
    ($name:ident, $variant:ident, $doc:literal) => {
        #[doc = $doc]
        #[derive(Debug, Clone, Default, PartialEq, Eq)]
        pub struct $name(String);

        impl $name {
            /// The text.
            pub fn as_str(&self) -> &str {
                &self.0
            }
        }

        impl H5Type for $name {
            fn type_descriptor() -> TypeDescriptor {
                TypeDescriptor::$variant
            }
            fn to_text(&self) -> Option<&str> {
                Some(&self.0)
            }
            fn from_text(s: &str) -> Option<Self> {
                Some(Self(s.to_owned()))
            }
        }
    };
}

varlen_string!(
    VarLenAscii,
    VarLenAscii,
    "A variable-length ASCII string (read only on the pure path)."
);
varlen_string!(
    VarLenUnicode,
    VarLenUnicode,
    "A variable-length UTF-8 string (read only on the pure path)."
);

/// Encodes `values` as elements of the stored type `stored`.
pub(crate) fn encode<T: H5Type>(values: &[T], stored: &TypeDescriptor) -> Result<Vec<u8>> {
    let size = stored.size();
    let mut out = Vec::with_capacity(values.len() * size);
    for v in values {
        match stored {
            TypeDescriptor::FixedAscii(n) | TypeDescriptor::FixedUnicode(n) => {
                let text = v
                    .to_text()
                    .ok_or_else(|| Error::from("a number cannot be stored as a string"))?;
                let b = text.as_bytes();
                let take = b.len().min(*n);
                out.extend_from_slice(&b[..take]);
                out.resize(out.len() + n - take, 0);
            }
            TypeDescriptor::Integer(_) | TypeDescriptor::Unsigned(_) | TypeDescriptor::Float(_) => {
                let n = v
                    .to_number()
                    .ok_or_else(|| Error::from("a string cannot be stored as a number"))?;
                encode_number(n, stored, &mut out)?;
            }
            other => return Err(Error::from(format!("writing {other} is not supported"))),
        }
    }
    Ok(out)
}

fn encode_number(n: Number, stored: &TypeDescriptor, out: &mut Vec<u8>) -> Result<()> {
    let int = |n: Number| -> i128 {
        match n {
            Number::Int(i) => i,
            Number::Float(x) => x as i128,
        }
    };
    let float = |n: Number| -> f64 {
        match n {
            Number::Int(i) => i as f64,
            Number::Float(x) => x,
        }
    };
    match stored {
        TypeDescriptor::Integer(s) | TypeDescriptor::Unsigned(s) => {
            let b = int(n).to_le_bytes();
            out.extend_from_slice(&b[..s.bytes()]);
        }
        TypeDescriptor::Float(FloatSize::U4) => {
            out.extend_from_slice(&(float(n) as f32).to_le_bytes())
        }
        TypeDescriptor::Float(FloatSize::U8) => out.extend_from_slice(&float(n).to_le_bytes()),
        other => return Err(Error::from(format!("{other} is not numeric"))),
    }
    Ok(())
}

/// Decodes little-endian elements of the stored type into `T`.
pub(crate) fn decode<T: H5Type>(bytes: &[u8], stored: &TypeDescriptor) -> Result<Vec<T>> {
    let size = stored.size();
    if size == 0 {
        return Err(Error::from(format!("reading {stored} is not supported")));
    }
    let mismatch = || {
        Error::from(format!(
            "cannot convert {stored} to {}",
            T::type_descriptor()
        ))
    };
    bytes
        .chunks_exact(size)
        .map(|b| {
            let n = match stored {
                TypeDescriptor::Integer(_) => {
                    let mut w = if b[size - 1] & 0x80 != 0 {
                        [0xffu8; 16]
                    } else {
                        [0u8; 16]
                    };
                    w[..size].copy_from_slice(b);
                    Some(Number::Int(i128::from_le_bytes(w)))
                }
                TypeDescriptor::Unsigned(_) => {
                    let mut w = [0u8; 16];
                    w[..size].copy_from_slice(b);
                    Some(Number::Int(i128::from_le_bytes(w)))
                }
                TypeDescriptor::Float(FloatSize::U4) => Some(Number::Float(f32::from_le_bytes(
                    b.try_into().expect("4 bytes"),
                )
                    as f64)),
                TypeDescriptor::Float(FloatSize::U8) => Some(Number::Float(f64::from_le_bytes(
                    b.try_into().expect("8 bytes"),
                ))),
                _ => None,
            };
            match n {
                Some(n) => T::from_number(n).ok_or_else(mismatch),
                None => {
                    let end = b.iter().position(|&c| c == 0).unwrap_or(b.len());
                    let text = String::from_utf8_lossy(&b[..end]);
                    T::from_text(text.trim_end_matches(' ')).ok_or_else(mismatch)
                }
            }
        })
        .collect()
}
