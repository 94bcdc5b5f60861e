//! f64 reference: special functions, noise, modulation, fading and coverage.
