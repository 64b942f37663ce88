//! VPCLMULQDQ kernels (filled in by the Toeplitz work).
