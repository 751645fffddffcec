"""Analysis of posteriors: summaries, derived quantities, evidence, detections, band depths."""
