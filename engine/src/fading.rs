//! TODO-fading
