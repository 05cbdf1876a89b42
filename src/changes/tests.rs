//! Unit tests of the changes module: the arithmetic of each kind.
