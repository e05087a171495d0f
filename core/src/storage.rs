//! Stage–storage relations. (being written)
