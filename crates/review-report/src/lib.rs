//! placeholder crate root, replaced by its owner.
#![deny(missing_docs)]
