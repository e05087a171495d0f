//! Outlet hydraulics: orifices, weirs, gates, risers, spillways, composite outlets, ratings.
//! (being written)
