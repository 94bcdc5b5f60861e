//! TODO-modulation
