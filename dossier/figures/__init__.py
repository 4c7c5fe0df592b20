"""One function per figure: plain data in, deterministic SVG text out."""
