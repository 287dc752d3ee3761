//! Channel selection.
