//! Importers: other formats written into participant folders in our format.

pub mod fhir;
