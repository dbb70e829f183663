//! Hostile input through the real binary.
