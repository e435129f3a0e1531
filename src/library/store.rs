//! On-disk form of the library model (being written).
