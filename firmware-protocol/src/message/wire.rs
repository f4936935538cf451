//! Little-endian fixed fields and length-prefixed text, written into and read from a body.

use super::error::{BodyError, DecodeError};
use crate::frame::MAX_BODY;

/// Writes fields into a caller's buffer (at most [`MAX_BODY`] bytes).
pub(super) struct Writer<'b> {
    buf: &'b mut [u8],
    pub(super) len: usize,
}

impl<'b> Writer<'b> {
    pub(super) fn new(buf: &'b mut [u8]) -> Self {
        Writer { buf, len: 0 }
    }
    pub(super) fn put(&mut self, bytes: &[u8]) -> Result<(), BodyError> {
        let end = self.len + bytes.len();
        if end > self.buf.len() || end > MAX_BODY {
            return Err(BodyError::TooLong);
        }
        self.buf[self.len..end].copy_from_slice(bytes);
        self.len = end;
        Ok(())
    }
    pub(super) fn u8(&mut self, v: u8) -> Result<(), BodyError> {
        self.put(&[v])
    }
    pub(super) fn u16(&mut self, v: u16) -> Result<(), BodyError> {
        self.put(&v.to_le_bytes())
    }
    pub(super) fn u32(&mut self, v: u32) -> Result<(), BodyError> {
        self.put(&v.to_le_bytes())
    }
    pub(super) fn u64(&mut self, v: u64) -> Result<(), BodyError> {
        self.put(&v.to_le_bytes())
    }
    pub(super) fn text(
        &mut self,
        s: &str,
        max: usize,
        field: &'static str,
    ) -> Result<(), BodyError> {
        if s.len() > max {
            return Err(BodyError::BadField(field));
        }
        self.u8(s.len() as u8)?;
        self.put(s.as_bytes())
    }
}

/// Reads fields from a body, refusing to run past its end.
pub(super) struct Reader<'a> {
    pub(super) buf: &'a [u8],
}

impl<'a> Reader<'a> {
    pub(super) fn take(&mut self, n: usize) -> Result<&'a [u8], DecodeError> {
        if self.buf.len() < n {
            return Err(DecodeError::Truncated);
        }
        let (a, b) = self.buf.split_at(n);
        self.buf = b;
        Ok(a)
    }
    pub(super) fn u8(&mut self) -> Result<u8, DecodeError> {
        Ok(self.take(1)?[0])
    }
    pub(super) fn u16(&mut self) -> Result<u16, DecodeError> {
        let b = self.take(2)?;
        Ok(u16::from_le_bytes([b[0], b[1]]))
    }
    pub(super) fn u32(&mut self) -> Result<u32, DecodeError> {
        let b = self.take(4)?;
        Ok(u32::from_le_bytes([b[0], b[1], b[2], b[3]]))
    }
    pub(super) fn i32(&mut self) -> Result<i32, DecodeError> {
        Ok(self.u32()? as i32)
    }
    pub(super) fn u64(&mut self) -> Result<u64, DecodeError> {
        let b = self.take(8)?;
        let mut a = [0u8; 8];
        a.copy_from_slice(b);
        Ok(u64::from_le_bytes(a))
    }
    pub(super) fn text(&mut self, max: usize, field: &'static str) -> Result<&'a str, DecodeError> {
        let n = self.u8()? as usize;
        if n > max {
            return Err(DecodeError::BadField(field));
        }
        core::str::from_utf8(self.take(n)?).map_err(|_| DecodeError::BadText)
    }
    /// Nothing may follow the message.
    pub(super) fn end(&self) -> Result<(), DecodeError> {
        if self.buf.is_empty() {
            Ok(())
        } else {
            Err(DecodeError::TrailingBytes)
        }
    }
}
