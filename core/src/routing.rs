//! Level-pool routing. (being written)
