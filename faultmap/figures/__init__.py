"""Figures: matplotlib Figure objects built from analysis results (no pyplot state)."""
