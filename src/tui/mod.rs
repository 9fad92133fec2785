//! See DESIGN.md.
