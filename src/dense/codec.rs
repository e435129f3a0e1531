//! The byte layout shared by the dense signal's saved parts: a magic tag, little-endian
//! integers and `f32`s, and a BLAKE3 trailer over everything before it.
//!
//! Takes values to write, or bytes to read; gives bytes, or the values with a typed
//! [`DenseError::Decode`] for anything short, damaged or out of range. It never panics and
//! never allocates more than the bytes it was given can fill.

use super::DenseError;

const CHECKSUM_LEN: usize = 32;

/// Builds a part: magic first, checksum last ([`PartWriter::finish`]).
pub(crate) struct PartWriter {
    bytes: Vec<u8>,
}

impl PartWriter {
    pub(crate) fn new(magic: &[u8; 8], capacity: usize) -> PartWriter {
        let mut bytes = Vec::with_capacity(capacity + 8 + CHECKSUM_LEN);
        bytes.extend_from_slice(magic);
        PartWriter { bytes }
    }

    pub(crate) fn u32(&mut self, v: u32) {
        self.bytes.extend_from_slice(&v.to_le_bytes());
    }

    pub(crate) fn u64(&mut self, v: u64) {
        self.bytes.extend_from_slice(&v.to_le_bytes());
    }

    pub(crate) fn f32(&mut self, v: f32) {
        self.bytes.extend_from_slice(&v.to_le_bytes());
    }

    pub(crate) fn u32s(&mut self, vs: &[u32]) {
        for &v in vs {
            self.u32(v);
        }
    }

    pub(crate) fn f32s(&mut self, vs: &[f32]) {
        for &v in vs {
            self.f32(v);
        }
    }

    pub(crate) fn finish(mut self) -> Vec<u8> {
        let sum = blake3::hash(&self.bytes);
        self.bytes.extend_from_slice(sum.as_bytes());
        self.bytes
    }
}

/// Reads a part written by [`PartWriter`], after checking its magic and checksum.
pub(crate) struct PartReader<'a> {
    what: &'static str,
    body: &'a [u8],
    at: usize,
}

impl<'a> PartReader<'a> {
    /// Checks `bytes` are a `what` part (magic and checksum) and reads from after the magic.
    pub(crate) fn open(
        what: &'static str,
        magic: &[u8; 8],
        bytes: &'a [u8],
    ) -> Result<PartReader<'a>, DenseError> {
        if bytes.len() < magic.len() + CHECKSUM_LEN {
            return Err(decode(what, format!("{} bytes is too short", bytes.len())));
        }
        let (content, sum) = bytes.split_at(bytes.len() - CHECKSUM_LEN);
        if !content.starts_with(magic) {
            return Err(decode(
                what,
                format!(
                    "does not start with `{}` (not this kind of part)",
                    String::from_utf8_lossy(magic)
                ),
            ));
        }
        if blake3::hash(content).as_bytes() != sum {
            return Err(decode(
                what,
                "checksum does not match (damaged bytes)".into(),
            ));
        }
        Ok(PartReader {
            what,
            body: content,
            at: magic.len(),
        })
    }

    pub(crate) fn error(&self, message: String) -> DenseError {
        decode(self.what, message)
    }

    fn take(&mut self, n: usize) -> Result<&'a [u8], DenseError> {
        let end = self.at.checked_add(n).filter(|&e| e <= self.body.len());
        match end {
            Some(end) => {
                let s = &self.body[self.at..end];
                self.at = end;
                Ok(s)
            }
            None => Err(self.error(format!(
                "ends early: {n} more bytes wanted at offset {}",
                self.at
            ))),
        }
    }

    pub(crate) fn u32(&mut self) -> Result<u32, DenseError> {
        let mut b = [0u8; 4];
        b.copy_from_slice(self.take(4)?);
        Ok(u32::from_le_bytes(b))
    }

    pub(crate) fn u64(&mut self) -> Result<u64, DenseError> {
        let mut b = [0u8; 8];
        b.copy_from_slice(self.take(8)?);
        Ok(u64::from_le_bytes(b))
    }

    /// `n` finite `f32`s; checks the bytes are there before allocating.
    pub(crate) fn f32s(&mut self, n: usize) -> Result<Vec<f32>, DenseError> {
        let len = n
            .checked_mul(4)
            .ok_or_else(|| self.error(format!("{n} values is too many")))?;
        let raw = self.take(len)?;
        let values: Vec<f32> = raw
            .chunks_exact(4)
            .map(|c| f32::from_le_bytes([c[0], c[1], c[2], c[3]]))
            .collect();
        if let Some(i) = values.iter().position(|v| !v.is_finite()) {
            return Err(self.error(format!("value {i} of a block is not finite")));
        }
        Ok(values)
    }

    /// `n` `u32`s; checks the bytes are there before allocating.
    pub(crate) fn u32s(&mut self, n: usize) -> Result<Vec<u32>, DenseError> {
        let len = n
            .checked_mul(4)
            .ok_or_else(|| self.error(format!("{n} values is too many")))?;
        let raw = self.take(len)?;
        Ok(raw
            .chunks_exact(4)
            .map(|c| u32::from_le_bytes([c[0], c[1], c[2], c[3]]))
            .collect())
    }

    /// The number of bytes not yet read (before the checksum).
    pub(crate) fn remaining(&self) -> usize {
        self.body.len() - self.at
    }

    /// Fails unless every byte before the checksum was read.
    pub(crate) fn finish(self) -> Result<(), DenseError> {
        if self.remaining() != 0 {
            return Err(self.error(format!("{} unexpected bytes at the end", self.remaining())));
        }
        Ok(())
    }
}

fn decode(what: &'static str, message: String) -> DenseError {
    DenseError::Decode { what, message }
}

#[cfg(test)]
mod tests {
    use super::*;

    const MAGIC: &[u8; 8] = b"QTESTPT1";

    #[test]
    fn round_trip_and_damage() {
        let mut w = PartWriter::new(MAGIC, 16);
        w.u32(7);
        w.u64(u64::MAX);
        w.f32s(&[1.5, -2.0]);
        let bytes = w.finish();
        let mut r = PartReader::open("test part", MAGIC, &bytes).expect("valid part");
        assert_eq!(r.u32().ok(), Some(7));
        assert_eq!(r.u64().ok(), Some(u64::MAX));
        assert_eq!(r.f32s(2).ok(), Some(vec![1.5, -2.0]));
        assert!(r.finish().is_ok());

        let mut damaged = bytes.clone();
        damaged[10] ^= 1;
        assert!(matches!(
            PartReader::open("test part", MAGIC, &damaged),
            Err(DenseError::Decode { .. })
        ));
        assert!(PartReader::open("test part", b"QOTHERP1", &bytes).is_err());
        assert!(PartReader::open("test part", MAGIC, &bytes[..20]).is_err());
        let mut r = PartReader::open("test part", MAGIC, &bytes).expect("valid part");
        assert!(r.f32s(1 << 40).is_err());
    }
}
