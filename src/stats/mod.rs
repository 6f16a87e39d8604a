//! Distribution functions and control limits (being written).
