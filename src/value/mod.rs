//! The SQL values ogive builds and reads: their byte layouts, encoding, decoding and
//! validation at the boundary.

pub mod sketch;
