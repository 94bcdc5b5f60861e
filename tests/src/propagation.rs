//! f64 reference: path loss, apertures and rain.
