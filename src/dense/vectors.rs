//! A set of vectors of one dimension, stored flat as `f32` and saved little-endian.
//!
//! Takes rows (premise vectors, in premise order); gives them by id (`u32`, the row number)
//! and as bytes. `f32` is kept rather than f16 or int8: 20k premises of dimension 256 are
//! 20 MiB, small beside the encoder, and exact scores keep the exact scan a reference for
//! HNSW. It does not normalise: callers give unit vectors (the encoder's output).

use super::codec::{PartReader, PartWriter};
use super::DenseError;

const MAGIC: &[u8; 8] = b"QRYVEC\0\x01";
const WHAT: &str = "dense vectors";

/// Vectors of length `dim`, row `i` at `data[i·dim..(i+1)·dim]`.
#[derive(Clone, Debug, PartialEq)]
pub struct VectorSet {
    dim: usize,
    data: Vec<f32>,
}

impl VectorSet {
    /// An empty set of vectors of length `dim` (at least 1).
    pub fn new(dim: usize) -> Result<VectorSet, DenseError> {
        if dim == 0 {
            return Err(DenseError::InvalidSetting {
                field: "dim",
                message: "vectors need at least one dimension".into(),
            });
        }
        Ok(VectorSet {
            dim,
            data: Vec::new(),
        })
    }

    /// The set of `rows`, each of length `dim`, all values finite.
    pub fn from_rows(dim: usize, rows: &[Vec<f32>]) -> Result<VectorSet, DenseError> {
        let mut set = VectorSet::new(dim)?;
        set.data.reserve(rows.len() * dim);
        for row in rows {
            set.push(row)?;
        }
        Ok(set)
    }

    /// Appends one vector; its id is the number of vectors before it.
    pub fn push(&mut self, v: &[f32]) -> Result<u32, DenseError> {
        let id = self.len();
        if v.len() != self.dim {
            return Err(DenseError::BadVector {
                what: format!("vector {id}"),
                message: format!(
                    "has {} values, the set holds dimension {}",
                    v.len(),
                    self.dim
                ),
            });
        }
        if let Some(i) = v.iter().position(|x| !x.is_finite()) {
            return Err(DenseError::BadVector {
                what: format!("vector {id}"),
                message: format!("value {i} is not finite"),
            });
        }
        if id >= u32::MAX as usize {
            return Err(DenseError::BadVector {
                what: format!("vector {id}"),
                message: "a set holds fewer than 2^32 vectors".into(),
            });
        }
        self.data.extend_from_slice(v);
        Ok(id as u32)
    }

    /// The length of every vector.
    pub fn dim(&self) -> usize {
        self.dim
    }

    /// The number of vectors.
    pub fn len(&self) -> usize {
        self.data.len() / self.dim
    }

    /// True when the set holds no vector.
    pub fn is_empty(&self) -> bool {
        self.data.is_empty()
    }

    /// Vector `id`, or `None` outside the set.
    pub fn get(&self, id: u32) -> Option<&[f32]> {
        let start = (id as usize).checked_mul(self.dim)?;
        self.data.get(start..start + self.dim)
    }

    /// All vectors in id order.
    pub fn iter(&self) -> std::slice::ChunksExact<'_, f32> {
        self.data.chunks_exact(self.dim)
    }

    /// The flat values, row after row.
    pub fn as_flat(&self) -> &[f32] {
        &self.data
    }

    /// Layout (little-endian): magic `QRYVEC\0\x01`; dim u32, count u32; count × dim f32;
    /// BLAKE3 of all that.
    pub fn to_bytes(&self) -> Vec<u8> {
        let mut w = PartWriter::new(MAGIC, 8 + 4 * self.data.len());
        w.u32(self.dim as u32);
        w.u32(self.len() as u32);
        w.f32s(&self.data);
        w.finish()
    }

    /// Reads bytes written by [`VectorSet::to_bytes`].
    pub fn from_bytes(bytes: &[u8]) -> Result<VectorSet, DenseError> {
        let mut r = PartReader::open(WHAT, MAGIC, bytes)?;
        let dim = r.u32()? as usize;
        let count = r.u32()? as usize;
        if dim == 0 {
            return Err(r.error("dimension 0".into()));
        }
        let n = count
            .checked_mul(dim)
            .ok_or_else(|| r.error(format!("{count} vectors of dimension {dim} overflow")))?;
        let data = r.f32s(n)?;
        r.finish()?;
        Ok(VectorSet { dim, data })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_round_trip_and_are_checked() {
        let set = VectorSet::from_rows(2, &[vec![1.0, 0.0], vec![0.6, 0.8]]).expect("valid rows");
        assert_eq!(set.len(), 2);
        assert_eq!(set.get(1), Some(&[0.6f32, 0.8][..]));
        assert_eq!(set.get(2), None);
        let back = VectorSet::from_bytes(&set.to_bytes()).expect("own bytes");
        assert_eq!(back, set);
        assert!(VectorSet::from_rows(2, &[vec![1.0]]).is_err());
        assert!(VectorSet::from_rows(2, &[vec![f32::NAN, 0.0]]).is_err());
        let bytes = set.to_bytes();
        assert!(matches!(
            VectorSet::from_bytes(&bytes[..bytes.len() - 3]),
            Err(DenseError::Decode { .. })
        ));
    }
}
