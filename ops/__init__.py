"""Load and fault scripts (loopback only, bounded in time and count); results go to RELIABILITY.md."""
