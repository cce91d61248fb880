//! planisphere: scattering statistics of HEALPix maps on masked footprints.
