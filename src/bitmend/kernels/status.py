"""The status a decoder gives each codeword: 0 clean, 1..t symbols corrected, or FAILED.

One constant for every code family and kernel, so a status array means the same thing
wherever it came from. 255 fits the uint8 status arrays and lies above every t in the
catalog (the largest is 16 symbols for rs-255-223)."""

FAILED = 255  # a detected, uncorrectable codeword (or, in a truncated segment, one that never arrived)
