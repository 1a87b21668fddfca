//! The SQL values of ogive and their parsing and validation at the boundary.

pub mod model;
