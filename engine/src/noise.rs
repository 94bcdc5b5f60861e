//! TODO-noise
