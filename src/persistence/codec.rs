//! Little-endian field cursors used by the record payloads (crate-internal).
//!
//! Every multi-byte integer is little-endian; `f32`/`f64` are their IEEE 754 binary32/binary64
//! bit patterns, little-endian. A [`Writer`] fails with `BufferTooSmall` instead of writing past
//! its buffer; a [`Reader`] fails with `Truncated` instead of reading past its slice, and checks
//! floats for finiteness and ranges as it reads them.

use super::record::{DecodeError, EncodeError};

/// Appends fields to a caller-provided buffer.
pub(crate) struct Writer<'a> {
    buf: &'a mut [u8],
    pos: usize,
}

impl<'a> Writer<'a> {
    pub(crate) fn new(buf: &'a mut [u8]) -> Self {
        Writer { buf, pos: 0 }
    }

    /// Bytes written so far.
    pub(crate) fn len(&self) -> usize {
        self.pos
    }

    pub(crate) fn bytes(&mut self, data: &[u8]) -> Result<(), EncodeError> {
        let end = self
            .pos
            .checked_add(data.len())
            .ok_or(EncodeError::BufferTooSmall)?;
        let dst = self
            .buf
            .get_mut(self.pos..end)
            .ok_or(EncodeError::BufferTooSmall)?;
        dst.copy_from_slice(data);
        self.pos = end;
        Ok(())
    }

    pub(crate) fn u8(&mut self, v: u8) -> Result<(), EncodeError> {
        self.bytes(&[v])
    }

    pub(crate) fn u16(&mut self, v: u16) -> Result<(), EncodeError> {
        self.bytes(&v.to_le_bytes())
    }

    pub(crate) fn u32(&mut self, v: u32) -> Result<(), EncodeError> {
        self.bytes(&v.to_le_bytes())
    }

    /// A finite `f32`; `NonFinite { field }` otherwise.
    pub(crate) fn f32(&mut self, v: f32, field: &'static str) -> Result<(), EncodeError> {
        if !v.is_finite() {
            return Err(EncodeError::NonFinite { field });
        }
        self.bytes(&v.to_le_bytes())
    }

    /// A finite `f64`; `NonFinite { field }` otherwise.
    pub(crate) fn f64(&mut self, v: f64, field: &'static str) -> Result<(), EncodeError> {
        if !v.is_finite() {
            return Err(EncodeError::NonFinite { field });
        }
        self.bytes(&v.to_le_bytes())
    }
}

/// Reads fields from a byte slice.
pub(crate) struct Reader<'a> {
    buf: &'a [u8],
    pos: usize,
}

impl<'a> Reader<'a> {
    pub(crate) fn new(buf: &'a [u8]) -> Self {
        Reader { buf, pos: 0 }
    }

    /// Fails with `TrailingBytes` unless every byte was read.
    pub(crate) fn finish(&self) -> Result<(), DecodeError> {
        if self.pos == self.buf.len() {
            Ok(())
        } else {
            Err(DecodeError::TrailingBytes)
        }
    }

    pub(crate) fn take<const N: usize>(&mut self) -> Result<[u8; N], DecodeError> {
        let end = self.pos.checked_add(N).ok_or(DecodeError::Truncated)?;
        let src = self.buf.get(self.pos..end).ok_or(DecodeError::Truncated)?;
        let mut out = [0u8; N];
        out.copy_from_slice(src);
        self.pos = end;
        Ok(out)
    }

    pub(crate) fn slice(&mut self, len: usize) -> Result<&'a [u8], DecodeError> {
        let end = self.pos.checked_add(len).ok_or(DecodeError::Truncated)?;
        let src = self.buf.get(self.pos..end).ok_or(DecodeError::Truncated)?;
        self.pos = end;
        Ok(src)
    }

    pub(crate) fn u8(&mut self) -> Result<u8, DecodeError> {
        Ok(u8::from_le_bytes(self.take()?))
    }

    pub(crate) fn u16(&mut self) -> Result<u16, DecodeError> {
        Ok(u16::from_le_bytes(self.take()?))
    }

    pub(crate) fn u32(&mut self) -> Result<u32, DecodeError> {
        Ok(u32::from_le_bytes(self.take()?))
    }

    /// A finite `f32`; `NonFinite { field }` otherwise.
    pub(crate) fn f32(&mut self, field: &'static str) -> Result<f32, DecodeError> {
        let v = f32::from_le_bytes(self.take()?);
        if v.is_finite() {
            Ok(v)
        } else {
            Err(DecodeError::NonFinite { field })
        }
    }

    /// A finite `f64`; `NonFinite { field }` otherwise.
    pub(crate) fn f64(&mut self, field: &'static str) -> Result<f64, DecodeError> {
        let v = f64::from_le_bytes(self.take()?);
        if v.is_finite() {
            Ok(v)
        } else {
            Err(DecodeError::NonFinite { field })
        }
    }

    /// A `bool` stored as 0 or 1; `OutOfRange { field }` for any other byte.
    pub(crate) fn bool(&mut self, field: &'static str) -> Result<bool, DecodeError> {
        match self.u8()? {
            0 => Ok(false),
            1 => Ok(true),
            _ => Err(DecodeError::OutOfRange { field }),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn little_endian_ieee754_layout() {
        // IEEE 754-2008 binary32: 1.0 = 0x3F80_0000, binary64: -2.0 = 0xC000_0000_0000_0000
        // (standard bit patterns, common knowledge, from memory).
        let mut buf = [0u8; 16];
        let mut w = Writer::new(&mut buf);
        w.f32(1.0, "x").unwrap();
        w.f64(-2.0, "y").unwrap();
        w.u16(0x1234).unwrap();
        assert_eq!(w.len(), 14);
        assert_eq!(buf[..4], [0x00, 0x00, 0x80, 0x3F]);
        assert_eq!(buf[4..12], [0, 0, 0, 0, 0, 0, 0x00, 0xC0]);
        assert_eq!(buf[12..14], [0x34, 0x12]);
        let mut r = Reader::new(&buf[..14]);
        assert_eq!(r.f32("x"), Ok(1.0));
        assert_eq!(r.f64("y"), Ok(-2.0));
        assert_eq!(r.u16(), Ok(0x1234));
        assert_eq!(r.finish(), Ok(()));
        assert_eq!(r.u8(), Err(DecodeError::Truncated));
    }

    #[test]
    fn non_finite_and_overflow_are_typed_errors() {
        let mut buf = [0u8; 3];
        let mut w = Writer::new(&mut buf);
        assert_eq!(
            w.f32(f32::NAN, "a"),
            Err(EncodeError::NonFinite { field: "a" })
        );
        assert_eq!(w.u32(7), Err(EncodeError::BufferTooSmall));
        let nan = f32::NAN.to_le_bytes();
        assert_eq!(
            Reader::new(&nan).f32("b"),
            Err(DecodeError::NonFinite { field: "b" })
        );
        assert_eq!(
            Reader::new(&[2]).bool("c"),
            Err(DecodeError::OutOfRange { field: "c" })
        );
    }
}
