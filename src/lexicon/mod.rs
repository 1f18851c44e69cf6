//! Lexicons (placeholder).
