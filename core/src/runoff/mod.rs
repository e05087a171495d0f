//! Rational-method runoff, time of concentration, hydrographs. (being written)
