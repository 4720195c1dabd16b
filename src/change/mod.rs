//! AlignedStack -> change records: volumes, level of detection, peak and crest movement (placeholder).
