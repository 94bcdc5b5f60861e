//! Seeded, deterministic channel simulation (being written).
