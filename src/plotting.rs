//! Map pictures (placeholder, filled in below).
