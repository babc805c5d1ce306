//! The design file (TOML): what the designer asks for, validated.
