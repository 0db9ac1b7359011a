//! cairn: find dense cores and clumps in maps of molecular clouds, see how they nest, measure
//! them and judge their gravitational state.
//!
//! Data flows one way: map loading ([`header`], [`wcs`], [`units`], [`map`]) -> hierarchy ->
//! measurements -> physics -> writers and figures. Each module's doc comment says what it owns
//! and which papers it implements.

pub mod angles;
pub mod compare;
pub mod completeness;
pub mod draw;
pub mod error;
pub mod fits_write;
pub mod header;
pub mod hierarchy;
pub mod inject;
pub mod inspect;
pub mod map;
pub mod measure;
pub mod memory;
pub mod noise;
pub mod output;
pub mod physics;
pub mod populations;
pub mod render;
pub mod resolution;
pub mod score;
pub mod segment;
pub mod synth;
pub mod table;
pub mod units;
pub mod wcs;
