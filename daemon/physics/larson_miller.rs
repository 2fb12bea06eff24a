//! larson_miller
