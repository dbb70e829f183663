//! A run: its plan, execution, shards and merge, and the partial results they share.

pub mod execute;
pub mod partial;
pub mod shard;
