"""Frames, sync markers, protected headers, CRC and resynchronisation."""
