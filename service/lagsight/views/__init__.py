"""HTTP views: one blueprint per module."""
