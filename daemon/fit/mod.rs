//! Material constants from creep test data (`lifeledger fit`).
